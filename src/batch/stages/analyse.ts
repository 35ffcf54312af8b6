/**
 * Stage 2, analyse: the scan's bytes hashed, decoded, shrunk to the working size in CIELAB (L* for the
 * model), and its tone classified. Reads the source only.
 */
import { stat } from 'node:fs/promises';
import { classifyTone, decodeImage, type DecodedImage, type ToneReport } from '../../image/index.js';
import { repairMethod, repairScan, type ScanRepairOptions } from '../../repair/index.js';
import { fileSha256 } from '../hash.js';
import { workingLab } from '../working-lab.js';
import { workingSize } from '../colourise.js';

export interface Analysis {
  /** The decoded scan; render lets its samples go once they are converted. */
  decoded: DecodedImage;
  sha256: string;
  bytes: number;
  mtimeMs: number;
  /** The working size and the scan's L* there. */
  working: { width: number; height: number; L: Float32Array };
  tone: ToneReport;
  warnings: string[];
  /** When repair was asked for: the mask (1 = replaced), the pixels replaced, and how (the decoded scan is the repaired one). */
  repair?: { mask: Uint8Array; repaired: number; method: string };
  /** Milliseconds spent hashing, decoding, repairing (when asked for), and making the working-size L*. */
  timings: { hash: number; decode: number; repair?: number; lightness: number };
}

/**
 * Reads one scan and what restore needs to know about it. Throws the image module's KinhueErrors for bad input.
 * @example
 *   const analysis = await analyse('scans/barn.jpg', 512, { maxPixels: 1e8 });
 */
export async function analyse(
  source: string,
  workSize: number,
  options: {
    maxPixels?: number /** Repair dust, hairs and scratches first: the model, the tone report and the result then see the repaired scan. */;
    repair?: ScanRepairOptions;
  } = {},
): Promise<Analysis> {
  let t = performance.now();
  const lap = (): number => {
    const now = performance.now();
    const ms = Math.round(now - t);
    t = now;
    return ms;
  };
  const info = await stat(source).catch(() => undefined);
  const sha256 = await fileSha256(source);
  const hash = lap();
  const decoded = await decodeImage(source, { maxPixels: options.maxPixels });
  const decode = lap();
  const fixed = options.repair ? repairScan(decoded.pixels, options.repair) : undefined;
  if (fixed) decoded.pixels = fixed.pixels;
  const repair = fixed && options.repair ? { mask: fixed.mask, repaired: fixed.repaired, method: repairMethod(options.repair) } : undefined;
  const repairMs = fixed ? lap() : undefined;
  const px = decoded.pixels;
  const ws = workingSize(px.width, px.height, workSize);
  const small = workingLab(px, ws.width, ws.height);
  const tone = classifyTone(small);
  const warnings = [...decoded.warnings];
  if (tone.kind === 'colour') warnings.push('the source is a colour photograph: only its lightness was used and its colours were replaced');
  return {
    decoded,
    sha256,
    bytes: info?.size ?? 0,
    mtimeMs: info?.mtimeMs ?? 0,
    working: { width: ws.width, height: ws.height, L: small.L },
    tone,
    warnings,
    ...(repair ? { repair } : {}),
    timings: { hash, decode, ...(repairMs !== undefined ? { repair: repairMs } : {}), lightness: lap() },
  };
}
