/**
 * Restoring one scan: decode; L* at full resolution and depth; tone report; the model at the working
 * size; colour carried to full resolution edge-aware; the scan's own L* with the new a*b* converted to
 * sRGB at the scan's bit depth; the result, its confidence map and its provenance record written
 * atomically. The full-resolution stage runs in strips of rows, so a 100-megapixel scan never exists as
 * float planes.
 */
import { mkdir, rm, stat } from 'node:fs/promises';
import { dirname, relative, sep } from 'node:path';
import { greyToLightness, labToSrgb, limitChroma, sliceRows } from '../colour/index.js';
import {
  classifyTone, decodeImage, encodeImage, estimateStatement, provenanceXmp, supports16Bit, writeFileAtomic, writeGreyMap,
  type BitDepth, type Pixels, type ToneReport,
} from '../image/index.js';
import type { BackboneRecord, FaceFinder, KinhueModel } from '../model/index.js';
import { prepareGuidance, type GuidanceRecord } from '../hints/index.js';
import { VERSION } from '../version.js';
import { fullSizeGrid, mean, workingColour, workingSize, type RefineStep } from './colourise.js';
import { underFolder } from './discovery.js';
import { fileSha256 } from './hash.js';
import { repairOutputs, type PlannedOutputs } from './naming.js';
import { repairMethod, repairScan, sharedRepairModel } from '../repair/index.js';
import type { RestoreSettings } from './options.js';
import { workingLab } from './working-lab.js';

/** One file's work, as the queue hands it to a worker (plain data: it crosses a thread boundary). */
export interface FileJob {
  /** Absolute source path. */
  source: string;
  /** Source path relative to the inputs' common base ('/'-separated). */
  rel: string;
  /** Absolute output folder. */
  outDir: string;
  outputs: PlannedOutputs;
  settings: RestoreSettings;
  maxPixels?: number;
}

/** The `<name>.kinhue.json` provenance record. Field names are a stable contract (the review sheet reads them). */
export interface ProvenanceRecord {
  kinhue: string;
  /** Says the colour is estimated, not recorded. */
  statement: string;
  created: string;
  source: {
    path: string;
    relative: string;
    bytes: number;
    sha256: string;
    format: string;
    width: number;
    height: number;
    bitDepth: BitDepth;
    channels: number;
    pages: number;
  };
  tone: { kind: ToneReport['kind']; tint: { a: number; b: number }; name: string | null };
  result: { image: string; format: string; bitDepth: BitDepth; confidenceMap: string | null };
  /**
   * `topologySha256`: SHA-256 of the model folder's model.json (the network's layout) as loaded;
   * `backbone`: the borrowed detector the network reads, with its files' SHA-256, when it reads one.
   */
  model: { name: string; weightsSha256: string; topologySha256: string; folder: string; backbone?: BackboneRecord };
  settings: RestoreSettings;
  backend: string;
  /** Mean model confidence over the image, 0-1. */
  meanConfidence: number;
  /** Milliseconds per stage. */
  timings: { hash: number; decode: number; repair?: number; lightness: number; model: number; colour: number; encode: number; total: number };
  warnings: string[];
  /** Hints and reference photos: what was used, or why a hints file was ignored. Absent when neither applied. */
  guidance?: GuidanceRecord;
  /** Dust, hairs and scratches taken out before colouring (--repair): how, how much, and the files showing it. */
  repair?: RepairRecord;
}

export interface RepairRecord {
  method: string;
  /** Pixels replaced, and their share of the scan. */
  pixels: number;
  share: number;
  /** `<name>.repair.png`: white where a pixel was replaced. */
  mask: string;
  /** `<name>.repaired.<ext>`, the repaired scan without colour, when asked for. */
  scan: string | null;
}

export interface FileOutcome {
  record: ProvenanceRecord;
  size: number;
  mtimeMs: number;
  sha256: string;
  seconds: number;
}

export interface RestoreFileOptions {
  /** The backend name for the record. */
  backend: string;
  /** Applied to the working-size colour before upsampling (hints, reference photos). */
  refine?: RefineStep;
  /** Finds faces for the skin prior (absent when the run turned it off). */
  faceFinder?: FaceFinder;
}

/** Rows per strip: about a million pixels, so strip buffers stay near 20 MB whatever the image size. */
function stripRows(width: number): number {
  return Math.max(1, Math.floor((1 << 20) / width));
}

/**
 * Restores one scan and writes its three outputs. Throws KinhueErrors for bad input or failed writes.
 * @example
 *   const outcome = await restoreFile(job, model, { backend: 'wasm' });
 */
export async function restoreFile(job: FileJob, model: KinhueModel, options: RestoreFileOptions): Promise<FileOutcome> {
  const t0 = performance.now();
  const clock = (() => {
    let last = t0;
    return () => {
      const now = performance.now();
      const d = now - last;
      last = now;
      return Math.round(d);
    };
  })();
  const { settings, outputs } = job;
  const info = await stat(job.source).catch(() => undefined);
  const sha256 = await fileSha256(job.source);
  const tHash = clock();

  const decoded = await decodeImage(job.source, { maxPixels: job.maxPixels });
  let px: Pixels | undefined = decoded.pixels;
  const sourceDepth = px.depth;
  const { width: W, height: H, channels } = px;
  const tDecode = clock();

  // Repair comes first, so the model, the tone report and the result all see the repaired scan.
  const repairOptions = settings.repair ? { model: await sharedRepairModel(), fill: settings.repair.fill } : undefined;
  let repaired = repairOptions ? repairScan(px, repairOptions) : undefined;
  const repair = repaired && { mask: repaired.mask, repaired: repaired.repaired };
  if (repaired) px = repaired.pixels;
  // Kept for writing only when asked for; otherwise the repaired samples go when the colour pass is done.
  let repairedScan: Pixels | undefined = settings.repairedScan ? repaired?.pixels : undefined;
  repaired = undefined;
  const repairNames = repair ? repairOutputs(outputs) : undefined;
  const tRepair = repair ? clock() : undefined;

  // The scan at the working size: the model's input and the tone report.
  const ws = workingSize(W, H, settings.workSize);
  const small = workingLab(px, ws.width, ws.height);
  const Lwork = small.L;
  const tone = classifyTone(small);
  const warnings = [...decoded.warnings];
  if (tone.kind === 'colour') warnings.push('the source is a colour photograph: only its lightness was used and its colours were replaced');
  const tLightness = clock();

  // Hints (<name>.hints.json) and reference photos, applied at the working size; a bad hints file is ignored.
  const guidance = await prepareGuidance(job.source, W, H, {
    hintsDir: settings.hints || undefined, useHints: settings.hints !== false, reference: settings.reference, relative: job.rel,
  });
  const refine: RefineStep | undefined = options.refine || guidance.refine
    ? async (w) => { await options.refine?.(w); guidance.refine?.(w); }
    : undefined;
  const { work, skin } = await workingColour(Lwork, ws.width, ws.height, model, {
    decoding: settings.decoding,
    temperature: settings.temperature,
    faceFinder: options.faceFinder,
    refine,
  });
  if (skin?.faces.length) warnings.push(`skin prior: ${skin.faces.length} face${skin.faces.length === 1 ? '' : 's'} given a skin hue; correct with a hints file if wrong`);
  if (guidance.record.hints?.ignored) warnings.push(`hints file not used: ${guidance.record.hints.ignored}`);
  for (const note of guidance.record.hints?.adjustments ?? []) warnings.push(`hint ${note}`);
  const notListed = guidance.record.hints?.adjustmentsNotListed;
  if (notListed) warnings.push(`hints: and ${notListed} more entries whose chroma was reduced (not listed)`);
  for (const note of guidance.record.reference?.notes ?? []) warnings.push(`reference ${note}`);
  const tModel = clock();

  // Pass 2: the source's own L* with the new a*b*, to sRGB at the output depth; the confidence map beside it.
  const grid = fullSizeGrid(work);
  const outDepth: BitDepth = sourceDepth === 16 && supports16Bit(outputs.format) ? 16 : 8;
  const alpha = channels === 2 || channels === 4;
  const outChannels = alpha ? 4 : 3;
  const out = outDepth === 16 ? new Uint16Array(W * H * outChannels) : new Uint8Array(W * H * outChannels);
  const rowsPer = stripRows(W);
  const a = new Float32Array(rowsPer * W);
  const b = new Float32Array(rowsPer * W);
  for (let y = 0; y < H; y += rowsPer) {
    const rows = Math.min(rowsPer, H - y);
    const n = rows * W;
    const strip = stripOf(px, y, rows);
    const L = greyToLightness(strip, channels);
    const sa = a.subarray(0, n);
    const sb = b.subarray(0, n);
    sliceRows(grid, L, W, H, y, rows, sa, sb);
    limitChroma(L, sa, sb);
    const target = out.subarray(y * W * outChannels, (y + rows) * W * outChannels);
    labToSrgb({ L, a: sa, b: sb }, target, outChannels);
    if (alpha) copyAlpha(strip, channels, sourceDepth, target, outDepth);
  }
  // The source samples are done with: let them go before the encoder needs its own memory (huge scans).
  px = undefined;
  (decoded as { pixels?: Pixels }).pixels = undefined;
  const tColour = clock();

  const imagePath = underFolder(job.outDir, outputs.image);
  await mkdir(dirname(imagePath), { recursive: true });
  const sourceFromOutput = relative(dirname(imagePath), job.source).split(sep).join('/');
  const meanConfidence = mean(work.confidence);
  const xmp = provenanceXmp({
    sourceFile: sourceFromOutput,
    derivedFromHash: sha256,
    extra: {
      model: settings.model,
      meanConfidence: meanConfidence.toFixed(3),
      ...(settings.confidence ? { confidenceMap: baseName(outputs.confidence) } : {}),
      record: baseName(outputs.record),
      ...(skin?.faces.length ? { skinPriorFaces: skin.faces.length } : {}),
      ...(repair && repairNames ? { repaired: 'yes', repairedPixels: repair.repaired, repairMask: baseName(repairNames.mask) } : {}),
    },
  });
  // A result is its image, confidence map and record together: when one cannot be written, the
  // parts already written are removed, so no result stands without its record.
  const written: string[] = [];
  const undo = async (error: unknown): Promise<never> => {
    await Promise.all(written.map((path) => rm(path, { force: true }).catch(() => undefined)));
    throw error;
  };
  const encoded = await encodeImage(
    { width: W, height: H, channels: outChannels, depth: outDepth, data: out } as Pixels,
    imagePath,
    { format: outputs.format, quality: settings.quality ?? undefined, exif: decoded.exif, icc: decoded.icc, xmp, maxPixels: job.maxPixels },
  );
  written.push(imagePath);
  warnings.push(...encoded.warnings);
  if (settings.confidence) {
    const conf = Uint8Array.from(work.confidence, (v) => Math.round(Math.min(1, Math.max(0, v)) * 255));
    const confidencePath = underFolder(job.outDir, outputs.confidence);
    await writeGreyMap(conf, work.confidenceWidth, work.confidenceHeight, W, H, confidencePath, job.maxPixels).catch(undo);
    written.push(confidencePath);
  }
  if (repair && repairNames) {
    const maskPath = underFolder(job.outDir, repairNames.mask);
    const white = Uint8Array.from(repair.mask, (m) => (m ? 255 : 0));
    await encodeImage({ width: W, height: H, channels: 1, depth: 8, data: white }, maskPath, { format: 'png', maxPixels: job.maxPixels }).catch(undo);
    written.push(maskPath);
    if (repairedScan) {
      const scanPath = underFolder(job.outDir, repairNames.scan);
      const scanXmp = provenanceXmp({
        sourceFile: sourceFromOutput,
        derivedFromHash: sha256,
        description: `Repaired scan of ${baseName(job.rel)}, made by kinhue: dust, hairs and scratches replaced in ${repair.repaired} pixels ` +
          `(white in ${baseName(repairNames.mask)}); every other pixel is the scan's own. No colour was added.`,
        extra: { repaired: 'yes', repairedPixels: repair.repaired, repairMask: baseName(repairNames.mask), record: baseName(outputs.record) },
      });
      const repairedEncoded = await encodeImage(repairedScan, scanPath, {
        format: outputs.format, quality: settings.quality ?? undefined, exif: decoded.exif, icc: decoded.icc, xmp: scanXmp, maxPixels: job.maxPixels,
      }).catch(undo);
      written.push(scanPath);
      warnings.push(...repairedEncoded.warnings.map((w) => `repaired scan: ${w}`));
      repairedScan = undefined;
    }
  }
  const tEncode = clock();

  const record: ProvenanceRecord = {
    kinhue: VERSION,
    statement: estimateStatement(job.source),
    created: new Date().toISOString(),
    source: {
      path: job.source,
      relative: job.rel,
      bytes: info?.size ?? 0,
      sha256,
      format: decoded.format,
      width: W,
      height: H,
      bitDepth: decoded.bitDepth,
      channels,
      pages: decoded.pageCount,
    },
    tone: { kind: tone.kind, tint: { a: round2(tone.tint.a), b: round2(tone.tint.b) }, name: tone.name ?? null },
    result: {
      image: baseName(outputs.image),
      format: outputs.format,
      bitDepth: encoded.depth,
      confidenceMap: settings.confidence ? baseName(outputs.confidence) : null,
    },
    model: {
      name: settings.model, weightsSha256: settings.weightsSha256, topologySha256: model.topologySha256, folder: model.dir ?? '',
      ...(model.meta.backbone ? { backbone: model.meta.backbone } : {}),
    },
    settings,
    backend: options.backend,
    meanConfidence: Number(meanConfidence.toFixed(4)),
    timings: {
      hash: tHash, decode: tDecode, ...(tRepair !== undefined ? { repair: tRepair } : {}), lightness: tLightness, model: tModel, colour: tColour, encode: tEncode,
      total: 0,
    },
    warnings,
    ...(guidance.record.hints || guidance.record.reference || skin?.faces.length
      ? { guidance: { ...guidance.record, ...(skin?.faces.length ? { skin } : {}) } }
      : {}),
    ...(repair && repairNames
      ? {
        repair: {
          method: repairMethod(repairOptions),
          pixels: repair.repaired,
          share: Number((repair.repaired / (W * H)).toFixed(6)),
          mask: baseName(repairNames.mask),
          scan: settings.repairedScan ? baseName(repairNames.scan) : null,
        },
      }
      : {}),
  };
  record.timings.total = Math.round(performance.now() - t0);
  await writeFileAtomic(underFolder(job.outDir, outputs.record), `${JSON.stringify(record, null, 2)}\n`).catch(undo);
  return {
    record,
    size: info?.size ?? 0,
    mtimeMs: info?.mtimeMs ?? 0,
    sha256,
    seconds: (performance.now() - t0) / 1000,
  };
}

/** Rows y to y + rows of the interleaved samples, without copying. */
function stripOf(px: Pixels, y: number, rows: number): Uint8Array | Uint16Array {
  const per = px.width * px.channels;
  return px.data.subarray(y * per, (y + rows) * per);
}

/** Copies the source's alpha into the last channel of the output strip, converting depth if needed. */
function copyAlpha(
  src: Uint8Array | Uint16Array,
  channels: number,
  srcDepth: BitDepth,
  out: Uint8Array | Uint16Array,
  outDepth: BitDepth,
): void {
  const n = src.length / channels;
  const scale = srcDepth === outDepth ? 1 : outDepth === 8 ? 255 / 65535 : 65535 / 255;
  for (let i = 0; i < n; i++) out[i * 4 + 3] = Math.round(src[i * channels + channels - 1]! * scale);
}

function baseName(rel: string): string {
  return rel.slice(rel.lastIndexOf('/') + 1);
}

function round2(v: number): number {
  return Math.round(v * 100) / 100;
}
