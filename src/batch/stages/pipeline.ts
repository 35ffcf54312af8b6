/**
 * One plan entry restored, stage by stage: analyse -> predict -> guide -> render -> write. A worker
 * thread runs this for each entry the run hands it; the plan (plan.ts) has resolved every option before.
 */
import { supports16Bit, estimateStatement, type BitDepth, type Pixels } from '../../image/index.js';
import { guidanceWarnings, prepareGuides, type HintsSource } from '../../hints/index.js';
import type { FaceFinder, KinhueModel } from '../../model/index.js';
import { ErrorCodes, InputError } from '../../errors.js';
import { VERSION } from '../../version.js';
import { mean } from '../colourise.js';
import { repairOutputs, type PlannedOutputs } from '../naming.js';
import { sharedRepairModel } from '../../repair/index.js';
import type { RestoreSettings } from '../options.js';
import { analyse } from './analyse.js';
import { cachedMemory } from '../memory.js';
import { applyGuides, scanGuides } from './guide.js';
import { predictColour } from './predict.js';
import { confidenceGrey, render } from './render.js';
import { baseName, writeResult, type ProvenanceRecord, type RepairRecord } from './write.js';

/** One plan entry as the run hands it to a worker (plain data: it crosses a thread boundary). */
export interface FileJob {
  /** Absolute source path. */
  source: string;
  /** Source path relative to the inputs' common base ('/'-separated). */
  rel: string;
  /** Absolute output folder. */
  outDir: string;
  outputs: PlannedOutputs;
  settings: RestoreSettings;
  /** The scan's hints file as the plan read it (its text and hash), or null for none. */
  hints: HintsSource | null;
  maxPixels?: number;
}

export interface FileOutcome {
  record: ProvenanceRecord;
  size: number;
  mtimeMs: number;
  sha256: string;
  seconds: number;
}

/**
 * Restores one scan and writes its three outputs. Throws KinhueErrors for bad input or failed writes.
 * @example
 *   const outcome = await restoreFile(job, model, { backend: 'wasm' });
 */
export async function restoreFile(
  job: FileJob,
  model: KinhueModel,
  options: { backend: string /** Finds faces for the skin prior (absent when the run turned it off). */; faceFinder?: FaceFinder },
): Promise<FileOutcome> {
  const t0 = performance.now();
  const { settings, outputs } = job;
  const repairWith = settings.repair ? { model: await sharedRepairModel(), fill: settings.repair.fill } : undefined;
  const scan = await analyse(job.source, settings.workSize, { maxPixels: job.maxPixels, repair: repairWith });
  const { decoded, working } = scan;
  const { width: W, height: H, channels } = decoded.pixels;
  let t = performance.now();

  const guidance = await prepareGuides({ hints: job.hints, reference: settings.reference }, W, H);
  const memory = settings.memory ? await cachedMemory(model, settings.memory.folder, settings.workSize, job.maxPixels) : undefined;
  if (memory && memory.sha256 !== settings.memory?.sha256) {
    throw new InputError(ErrorCodes.BAD_DATA, 'the memory folder changed after the run started', {
      file: settings.memory?.folder,
      hint: 'leave the memory folder as it is while a run uses it, then run again',
    });
  }
  // The plan resolved every setting: a vividness it left out is 0, not the model's own.
  const predicted = await predictColour(working.L, working.width, working.height, model, {
    ...settings,
    vividness: settings.vividness ?? 0,
    features: memory !== undefined,
  });
  const guided = applyGuides(predicted, scanGuides(predicted, { faceFinder: options.faceFinder, memory }, guidance.guides));
  const records = guidance.record as Record<string, object>;
  for (const [name, fields] of Object.entries(guided.records)) {
    if (Object.keys(fields).length) records[name] = Object.assign(records[name] ?? {}, fields);
  }
  const colour = guided.colour;
  const warnings = [...scan.warnings, ...guidanceWarnings(guidance.record)];
  const tModel = Math.round(performance.now() - t);
  t = performance.now();

  const depth: BitDepth = decoded.pixels.depth === 16 && supports16Bit(outputs.format) ? 16 : 8;
  // The repaired scan, when it is to be written too, outlives render's release of the samples.
  const repairedScan = scan.repair && settings.repairedScan ? decoded.pixels : undefined;
  const image = render(decoded.pixels, colour, depth);
  // The source samples are done with: let them go before the encoder needs its own memory (huge scans).
  (decoded as { pixels?: Pixels }).pixels = undefined;
  const tColour = Math.round(performance.now() - t);
  t = performance.now();

  const meanConfidence = mean(colour.confidence);
  const written = await writeResult(
    {
      outDir: job.outDir,
      outputs,
      source: job.source,
      sha256: scan.sha256,
      settings,
      meanConfidence,
      maxPixels: job.maxPixels,
      skinFaces: guidance.record.skin?.faces.length ?? 0,
      ...(scan.repair ? { repair: { mask: scan.repair.mask, repaired: scan.repair.repaired, scan: repairedScan } } : {}),
    },
    image,
    { exif: decoded.exif, icc: decoded.icc },
    { grey: confidenceGrey(colour), width: colour.confidenceWidth, height: colour.confidenceHeight },
  );
  warnings.push(...written.warnings);
  const tEncode = Math.round(performance.now() - t);

  const record: ProvenanceRecord = {
    kinhue: VERSION,
    statement: estimateStatement(job.source),
    created: new Date().toISOString(),
    source: {
      path: job.source,
      relative: job.rel,
      bytes: scan.bytes,
      sha256: scan.sha256,
      format: decoded.format,
      width: W,
      height: H,
      bitDepth: decoded.bitDepth,
      channels,
      pages: decoded.pageCount,
    },
    tone: { kind: scan.tone.kind, tint: { a: round2(scan.tone.tint.a), b: round2(scan.tone.tint.b) }, name: scan.tone.name ?? null },
    result: {
      image: baseName(outputs.image),
      format: outputs.format,
      bitDepth: written.depth,
      confidenceMap: settings.confidence ? baseName(outputs.confidence) : null,
    },
    model: {
      name: settings.model,
      weightsSha256: settings.weightsSha256,
      topologySha256: model.topologySha256,
      folder: model.dir ?? '',
      ...(model.meta.backbone ? { backbone: model.meta.backbone } : {}),
    },
    settings,
    backend: options.backend,
    meanConfidence: Number(meanConfidence.toFixed(4)),
    timings: { ...scan.timings, model: tModel, colour: tColour, encode: tEncode, total: 0 },
    warnings,
    ...(Object.keys(guidance.record).length ? { guidance: guidance.record } : {}),
    ...(scan.repair ? { repair: repairRecord(scan.repair, outputs, W * H, settings.repairedScan === true) } : {}),
  };
  record.timings.total = Math.round(performance.now() - t0);
  await written.finish(record);
  return { record, size: scan.bytes, mtimeMs: scan.mtimeMs, sha256: scan.sha256, seconds: (performance.now() - t0) / 1000 };
}

/** The record of a scan's repair: how, how much, and the files that show it. */
function repairRecord(
  repair: { repaired: number; method: string },
  outputs: PlannedOutputs,
  pixels: number,
  scanWritten: boolean,
): RepairRecord {
  const names = repairOutputs(outputs);
  return {
    method: repair.method,
    pixels: repair.repaired,
    share: Number((repair.repaired / pixels).toFixed(6)),
    mask: baseName(names.mask),
    scan: scanWritten ? baseName(names.scan) : null,
  };
}

function round2(v: number): number {
  return Math.round(v * 100) / 100;
}
