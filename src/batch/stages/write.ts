/**
 * Stage 6, write: the result image with its XMP provenance, the confidence map and the provenance record,
 * each written atomically. A result is its image, confidence map and record together: when one cannot
 * be written, the parts already written are removed, so no result stands without its record. (The run
 * appends the manifest line once this stage has returned.)
 */
import { mkdir, rm } from 'node:fs/promises';
import { dirname, relative, sep } from 'node:path';
import { encodeImage, provenanceXmp, writeGreyMap, type BitDepth, type Pixels, type ToneReport } from '../../image/index.js';
import type { BackboneRecord } from '../../model/index.js';
import type { GuidanceRecord } from '../../hints/index.js';
import { underFolder, writeFileAtomic } from '../../files/index.js';
import { repairOutputs, type PlannedOutputs } from '../naming.js';
import type { RestoreSettings } from '../options.js';

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
  timings: {
    hash: number;
    decode: number;
    repair?: number;
    lightness: number;
    model: number;
    colour: number;
    encode: number;
    total: number;
  };
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

/** What repair did to a scan, for its outputs: the mask (1 = replaced), the count, and the repaired scan when it is to be written. */
export interface RepairOutputs {
  mask: Uint8Array;
  repaired: number;
  scan?: Pixels;
}

/** Where a result goes and what its image carries. */
export interface ResultTarget {
  outDir: string;
  outputs: PlannedOutputs;
  /** The scan, and the SHA-256 of its bytes, for the XMP packet. */
  source: string;
  sha256: string;
  settings: RestoreSettings;
  meanConfidence: number;
  maxPixels?: number;
  /** Faces the skin prior gave a skin hue (named in the XMP when any). */
  skinFaces?: number;
  /** The scan's repair, when it was repaired: its mask and, when asked for, the repaired scan are written too. */
  repair?: RepairOutputs;
}

/** What the image file carries from the scan besides pixels. */
export interface ImageExtras {
  exif?: Buffer;
  icc?: Buffer;
}

/**
 * Writes the result image and, when asked for, the confidence map (`confidence` at its own size, drawn at
 * the image's). Returns the image's bit depth as written and the encoder's warnings, and a function that
 * writes the record last (or removes what was written, when it cannot).
 * @example
 *   const written = await writeResult(target, image, extras, { grey, width, height });
 *   await written.finish(record);
 */
export async function writeResult(
  target: ResultTarget,
  image: Pixels,
  extras: ImageExtras,
  confidence: { grey: Uint8Array; width: number; height: number },
): Promise<{ depth: BitDepth; warnings: string[]; finish: (record: ProvenanceRecord) => Promise<void> }> {
  const { outDir, outputs, settings } = target;
  const imagePath = underFolder(outDir, outputs.image);
  await mkdir(dirname(imagePath), { recursive: true });
  const repairNames = target.repair ? repairOutputs(outputs) : undefined;
  const sourceFile = relative(dirname(imagePath), target.source).split(sep).join('/');
  const xmp = provenanceXmp({
    sourceFile,
    derivedFromHash: target.sha256,
    extra: {
      model: settings.model,
      meanConfidence: target.meanConfidence.toFixed(3),
      ...(settings.confidence ? { confidenceMap: baseName(outputs.confidence) } : {}),
      record: baseName(outputs.record),
      ...(target.skinFaces ? { skinPriorFaces: target.skinFaces } : {}),
      ...(repairNames ? { repaired: 'yes', repairedPixels: target.repair!.repaired, repairMask: baseName(repairNames.mask) } : {}),
    },
  });
  const written: string[] = [];
  const undo = async (error: unknown): Promise<never> => {
    await Promise.all(written.map((path) => rm(path, { force: true }).catch(() => undefined)));
    throw error;
  };
  const encoded = await encodeImage(image, imagePath, {
    format: outputs.format,
    quality: settings.quality ?? undefined,
    exif: extras.exif,
    icc: extras.icc,
    xmp,
    maxPixels: target.maxPixels,
  });
  written.push(imagePath);
  if (settings.confidence) {
    const confidencePath = underFolder(outDir, outputs.confidence);
    await writeGreyMap(
      confidence.grey,
      confidence.width,
      confidence.height,
      image.width,
      image.height,
      confidencePath,
      target.maxPixels,
    ).catch(undo);
    written.push(confidencePath);
  }
  const warnings = [...encoded.warnings];
  if (target.repair && repairNames) {
    const { mask, repaired, scan } = target.repair;
    const maskPath = underFolder(outDir, repairNames.mask);
    // A plain loop: Uint8Array.from with a mapping function calls it per pixel, seconds on a large scan.
    const white = new Uint8Array(mask.length);
    for (let i = 0; i < mask.length; i++) if (mask[i]) white[i] = 255;
    await encodeImage({ width: image.width, height: image.height, channels: 1, depth: 8, data: white }, maskPath, {
      format: 'png',
      maxPixels: target.maxPixels,
    }).catch(undo);
    written.push(maskPath);
    if (scan) {
      const scanPath = underFolder(outDir, repairNames.scan);
      const scanXmp = provenanceXmp({
        sourceFile,
        derivedFromHash: target.sha256,
        description:
          `Repaired scan of ${baseName(sourceFile)}, made by kinhue: dust, hairs and scratches replaced in ${repaired} pixels ` +
          `(white in ${baseName(repairNames.mask)}); every other pixel is the scan's own. No colour was added.`,
        extra: { repaired: 'yes', repairedPixels: repaired, repairMask: baseName(repairNames.mask), record: baseName(outputs.record) },
      });
      const scanEncoded = await encodeImage(scan, scanPath, {
        format: outputs.format,
        quality: settings.quality ?? undefined,
        exif: extras.exif,
        icc: extras.icc,
        xmp: scanXmp,
        maxPixels: target.maxPixels,
      }).catch(undo);
      written.push(scanPath);
      warnings.push(...scanEncoded.warnings.map((w) => `repaired scan: ${w}`));
    }
  }
  return {
    depth: encoded.depth,
    warnings,
    finish: async (record) => {
      await writeFileAtomic(underFolder(outDir, outputs.record), `${JSON.stringify(record, null, 2)}\n`).catch(undo);
    },
  };
}

/** The last segment of a '/'-separated output name. */
export function baseName(rel: string): string {
  return rel.slice(rel.lastIndexOf('/') + 1);
}
