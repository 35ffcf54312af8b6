/**
 * One plan entry restored, stage by stage: analyse -> predict -> guide -> render -> write. A worker
 * thread runs this for each entry the run hands it; the plan (plan.ts) has resolved every option before.
 */
import { supports16Bit, estimateStatement, type BitDepth, type Pixels } from '../../image/index.js';
import { guidanceWarnings, prepareGuides, type HintsSource } from '../../hints/index.js';
import type { FaceFinder, KinhueModel } from '../../model/index.js';
import { VERSION } from '../../version.js';
import { mean } from '../colourise.js';
import type { PlannedOutputs } from '../naming.js';
import type { RestoreSettings } from '../options.js';
import { analyse } from './analyse.js';
import { applyGuides, skinGuide } from './guide.js';
import { predictColour } from './predict.js';
import { confidenceGrey, render } from './render.js';
import { baseName, writeResult, type ProvenanceRecord } from './write.js';

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
  options: { backend: string; /** Finds faces for the skin prior (absent when the run turned it off). */ faceFinder?: FaceFinder },
): Promise<FileOutcome> {
  const t0 = performance.now();
  const { settings, outputs } = job;
  const scan = await analyse(job.source, settings.workSize, { maxPixels: job.maxPixels });
  const { decoded, working } = scan;
  const { width: W, height: H, channels } = decoded.pixels;
  let t = performance.now();

  const guidance = await prepareGuides({ hints: job.hints, reference: settings.reference }, W, H);
  const predicted = await predictColour(working.L, working.width, working.height, model, settings);
  // The skin prior goes first: reference photos and hints, which the archivist chose, have the last word.
  const guides = options.faceFinder ? [skinGuide(options.faceFinder), ...guidance.guides] : guidance.guides;
  const guided = applyGuides(predicted, guides);
  const records = guidance.record as Record<string, object>;
  for (const [name, fields] of Object.entries(guided.records)) {
    if (Object.keys(fields).length) records[name] = Object.assign(records[name] ?? {}, fields);
  }
  const colour = guided.colour;
  const warnings = [...scan.warnings, ...guidanceWarnings(guidance.record)];
  const tModel = Math.round(performance.now() - t);
  t = performance.now();

  const depth: BitDepth = decoded.pixels.depth === 16 && supports16Bit(outputs.format) ? 16 : 8;
  const image = render(decoded.pixels, colour, depth);
  // The source samples are done with: let them go before the encoder needs its own memory (huge scans).
  (decoded as { pixels?: Pixels }).pixels = undefined;
  const tColour = Math.round(performance.now() - t);
  t = performance.now();

  const meanConfidence = mean(colour.confidence);
  const written = await writeResult(
    {
      outDir: job.outDir, outputs, source: job.source, sha256: scan.sha256, settings, meanConfidence, maxPixels: job.maxPixels,
      skinFaces: guidance.record.skin?.faces.length ?? 0,
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
      name: settings.model, weightsSha256: settings.weightsSha256, topologySha256: model.topologySha256, folder: model.dir ?? '',
      ...(model.meta.backbone ? { backbone: model.meta.backbone } : {}),
    },
    settings,
    backend: options.backend,
    meanConfidence: Number(meanConfidence.toFixed(4)),
    timings: { ...scan.timings, model: tModel, colour: tColour, encode: tEncode, total: 0 },
    warnings,
    ...(Object.keys(guidance.record).length ? { guidance: guidance.record } : {}),
  };
  record.timings.total = Math.round(performance.now() - t0);
  await written.finish(record);
  return { record, size: scan.bytes, mtimeMs: scan.mtimeMs, sha256: scan.sha256, seconds: (performance.now() - t0) / 1000 };
}

function round2(v: number): number {
  return Math.round(v * 100) / 100;
}
