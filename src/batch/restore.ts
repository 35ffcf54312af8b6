/**
 * The restore run: discover the scans, plan their outputs, read the manifest, then restore every file
 * not already finished on a queue of worker threads, recording each outcome as it lands. One bad file is
 * recorded and the run goes on; a stop request lets files in progress finish and starts no new one.
 */
import { mkdir, readdir, rm, stat } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import pLimit from 'p-limit';
import { ErrorCodes, isKinhueError, ModelError, UsageError } from '../errors.js';
import { readModelInfo } from './model-info.js';
import { discoverInputs, underFolder } from './discovery.js';
import { appendManifest, readManifest, type ManifestRecord } from './manifest.js';
import { planOutputs, type PlannedOutputs } from './naming.js';
import { DEFAULT_MODEL_DIR, chooseDecoding } from '../model/index.js';
import { cachedReference, hintsFingerprint } from '../hints/index.js';
import { MANIFEST_NAME, defaultJobs, settingsKey, type RestoreOptions, type RestoreSettings } from './options.js';
import { WorkerPool } from './pool.js';
import type { FileJob, ProvenanceRecord } from './restore-file.js';
import { serialiseError, type SerialisedError } from './worker-protocol.js';
import { fileSha256 } from './hash.js';

/** What happens to one discovered file. */
export type PlanAction = 'run' | 'retry' | 'skip';

export interface PlannedFile {
  source: string;
  /** Source path relative to the inputs' common base. */
  rel: string;
  outputs: PlannedOutputs;
  /** SHA-256 of the scan's hints file when planned; null when it has none or hints are off. */
  hintsSha256: string | null;
  action: PlanAction;
  /** After the run: what happened ('planned' on a dry run). */
  status: 'planned' | 'done' | 'failed' | 'skipped' | 'not-run';
}

export interface FileFailure {
  source: string;
  rel: string;
  code: string;
  message: string;
  hint?: string;
}

export type RestoreEvent =
  | { type: 'plan'; files: PlannedFile[]; toRun: number; skipped: number; outDir: string; notes: string[] }
  | { type: 'backend'; name: string; warning?: string }
  | { type: 'start'; rel: string }
  | { type: 'done'; rel: string; output: string; seconds: number; done: number; failed: number; total: number; warnings: string[] }
  | { type: 'failed'; rel: string; failure: FileFailure; done: number; failed: number; total: number }
  | { type: 'stopping'; hard: boolean };

export interface RestoreSummary {
  outDir: string;
  manifest: string;
  /** Files found. */
  total: number;
  /** Restored in this run. */
  done: number;
  /** Already finished by an earlier run with the same settings. */
  skipped: number;
  failed: FileFailure[];
  /** Not started (or not finished) because the run was stopped. */
  notRun: number;
  interrupted: boolean;
  dryRun: boolean;
  seconds: number;
  backend?: string;
  model: { dir: string; name: string; weightsSha256: string };
  settings: RestoreSettings;
  /** Every discovered file with what was planned for it. */
  files: PlannedFile[];
  notes: string[];
}

/**
 * Restores every scan named by `options.inputs` into `options.out`. Resolves with a summary (failed files
 * included); rejects only when the run cannot start (usage, unusable model, unwritable output folder).
 * @example
 *   const summary = await restore({ inputs: ['scans/'], out: 'restored/' }, (e) => console.log(e.type));
 *   if (summary.failed.length) process.exitCode = 1;
 */
export async function restore(options: RestoreOptions, onEvent: (event: RestoreEvent) => void = () => {}): Promise<RestoreSummary> {
  const started = performance.now();
  const outDir = resolve(options.out);
  const modelDir = resolve(options.model ?? DEFAULT_MODEL_DIR);
  const jobs = options.jobs ?? defaultJobs();
  if (!Number.isInteger(jobs) || jobs < 1) throw new UsageError(`jobs must be a whole number of 1 or more, got ${jobs}`);
  const outInfo = await stat(outDir).catch(() => undefined);
  if (outInfo && !outInfo.isDirectory()) {
    throw new UsageError(`--out ${options.out} is a file, not a folder\nExample usage: kinhue restore scans/ --out restored/`);
  }

  const model = await readModelInfo(modelDir).catch((error: unknown) => {
    if (options.model === undefined && error instanceof ModelError) {
      throw new ModelError(`the shipped model is missing or damaged (${error.message})`, {
        file: modelDir,
        hint: 'reinstall kinhue, or pass a model folder with --model',
      });
    }
    throw error;
  });
  const settings: RestoreSettings = {
    model: model.name,
    weightsSha256: model.weightsSha256,
    workSize: options.workSize ?? model.workingSize,
    decoding: chooseDecoding(options, model.decoding),
    temperature: options.temperature ?? model.temperature,
    format: options.format ?? 'same',
    quality: options.quality ?? null,
    confidence: options.confidence ?? true,
    ...(options.hints !== undefined ? { hints: options.hints === false ? false : resolve(options.hints) } : {}),
    ...(options.reference ? { reference: resolve(options.reference) } : {}),
  };
  // A reference that cannot be used (grey, missing, not an image) stops the run before it starts.
  if (settings.reference) await cachedReference(settings.reference);
  const key = settingsKey(settings);

  const discovery = await discoverInputs(options.inputs, outDir);
  const outputs = planOutputs(discovery.files, settings.format);
  const manifestPath = `${outDir}/${MANIFEST_NAME}`;
  const previous = await readManifest(manifestPath);
  const files: PlannedFile[] = [];
  for (let i = 0; i < discovery.files.length; i++) {
    const f = discovery.files[i]!;
    const o = outputs[i]!;
    const last = previous.get(o.image);
    const hintsSha256 = settings.hints === false ? null : await hintsFingerprint(f.path, settings.hints || undefined, f.rel);
    let action: PlanAction = last?.status === 'failed' ? 'retry' : 'run';
    if (
      !options.force && last?.status === 'done' && last.settings === key && (last.hintsSha256 ?? null) === hintsSha256 &&
      (await stillFinished(f.path, outDir, o, last))
    ) {
      action = 'skip';
    }
    files.push({ source: f.path, rel: f.rel, outputs: o, hintsSha256, action, status: action === 'skip' ? 'skipped' : 'planned' });
  }
  const todo = files.filter((f) => f.action !== 'skip');
  onEvent({ type: 'plan', files, toRun: todo.length, skipped: files.length - todo.length, outDir, notes: discovery.notes });

  const summary: RestoreSummary = {
    outDir, manifest: manifestPath, total: files.length, done: 0, skipped: files.length - todo.length, failed: [],
    notRun: 0, interrupted: false, dryRun: Boolean(options.dryRun), seconds: 0,
    model: { dir: modelDir, name: model.name, weightsSha256: model.weightsSha256 }, settings, files, notes: discovery.notes,
  };
  if (options.dryRun || todo.length === 0) {
    summary.notRun = options.dryRun ? todo.length : 0;
    summary.seconds = (performance.now() - started) / 1000;
    return summary;
  }

  await mkdir(outDir, { recursive: true }).catch((error: unknown) => {
    throw new UsageError(`the output folder ${options.out} could not be created (${(error as Error).message})`, 'choose a writable --out folder');
  });
  const pool = new WorkerPool(Math.min(jobs, todo.length), { modelDir });
  const limit = pLimit(Math.min(jobs, todo.length));
  let stopping = false;
  let hard = false;
  let fatal: Error | undefined;
  const onStop = (): void => {
    if (stopping) return;
    stopping = true;
    onEvent({ type: 'stopping', hard: false });
  };
  const onHardStop = (): void => {
    onStop();
    if (hard) return;
    hard = true;
    onEvent({ type: 'stopping', hard: true });
    void pool.terminate();
  };
  if (options.signal?.aborted) onStop();
  options.signal?.addEventListener('abort', onStop);
  options.hardSignal?.addEventListener('abort', onHardStop);

  const runOne = async (file: PlannedFile): Promise<void> => {
    if (stopping || fatal) return;
    onEvent({ type: 'start', rel: file.rel });
    const job: FileJob = { source: file.source, rel: file.rel, outDir, outputs: file.outputs, settings, maxPixels: options.maxPixels };
    try {
      const outcome = await pool.run(job);
      if (pool.backend && summary.backend === undefined) {
        summary.backend = pool.backend;
        onEvent({ type: 'backend', name: pool.backend, warning: pool.backendWarning });
      }
      await appendManifest(manifestPath, doneRecord(file, outcome.record, outcome, key));
      summary.done++;
      file.status = 'done';
      onEvent({
        type: 'done', rel: file.rel, output: file.outputs.image, seconds: outcome.seconds,
        done: summary.done, failed: summary.failed.length, total: todo.length, warnings: outcome.record.warnings,
      });
    } catch (error) {
      if (hard) return; // unfinished, not failed: the next run does it again
      if (isKinhueError(error) && (error.code === ErrorCodes.BAD_MODEL || error.file === manifestPath)) {
        fatal ??= error;
        onStop();
        return;
      }
      const data: SerialisedError = serialiseError(error);
      const failure: FileFailure = { source: file.source, rel: file.rel, code: data.code, message: data.message, hint: data.hint };
      summary.failed.push(failure);
      file.status = 'failed';
      await appendManifest(manifestPath, failedRecord(file, failure, key)).catch((e: unknown) => {
        fatal ??= e as Error;
      });
      onEvent({ type: 'failed', rel: file.rel, failure, done: summary.done, failed: summary.failed.length, total: todo.length });
    }
  };

  try {
    await Promise.all(todo.map((file) => limit(() => runOne(file))));
  } finally {
    options.signal?.removeEventListener('abort', onStop);
    options.hardSignal?.removeEventListener('abort', onHardStop);
    await pool.close();
    if (hard) await removeTemporaryFiles(outDir, todo);
  }
  if (fatal) throw fatal;
  for (const f of todo) if (f.status === 'planned') f.status = 'not-run';
  summary.notRun = todo.length - summary.done - summary.failed.length;
  summary.interrupted = stopping && summary.notRun > 0;
  summary.seconds = (performance.now() - started) / 1000;
  return summary;
}

/** True when an earlier run's outputs are all present and the source is unchanged (size and time, else hash). */
async function stillFinished(source: string, outDir: string, outputs: PlannedOutputs, last: ManifestRecord): Promise<boolean> {
  const wanted = [outputs.image, outputs.record, ...(last.companions ?? [])];
  for (const rel of wanted) {
    if (!(await stat(underFolder(outDir, rel)).catch(() => undefined))) return false;
  }
  const info = await stat(source).catch(() => undefined);
  if (!info) return false;
  if (info.size === last.size && info.mtimeMs === last.mtimeMs) return true;
  try {
    return (await fileSha256(source)) === last.sha256;
  } catch {
    return false;
  }
}

function doneRecord(
  file: PlannedFile,
  record: ProvenanceRecord,
  outcome: { size: number; mtimeMs: number; sha256: string; seconds: number },
  key: string,
): ManifestRecord {
  return {
    time: new Date().toISOString(),
    status: 'done',
    source: file.source,
    output: file.outputs.image,
    companions: [file.outputs.record, ...(record.result.confidenceMap ? [file.outputs.confidence] : [])],
    size: outcome.size,
    mtimeMs: outcome.mtimeMs,
    sha256: outcome.sha256,
    hintsSha256: file.hintsSha256,
    settings: key,
    seconds: Number(outcome.seconds.toFixed(3)),
  };
}

function failedRecord(file: PlannedFile, failure: FileFailure, key: string): ManifestRecord {
  return {
    time: new Date().toISOString(),
    status: 'failed',
    source: file.source,
    output: file.outputs.image,
    settings: key,
    error: { code: failure.code, message: failure.message, ...(failure.hint ? { hint: failure.hint } : {}) },
  };
}

/** After workers were ended mid-write: removes their temporary files (`<name>.<pid>.<random>.tmp`). */
async function removeTemporaryFiles(outDir: string, files: PlannedFile[]): Promise<void> {
  const folders = new Set(files.map((f) => dirname(underFolder(outDir, f.outputs.image))));
  const marker = `.${process.pid}.`;
  for (const folder of folders) {
    const names = await readdir(folder).catch(() => [] as string[]);
    for (const name of names) {
      if (name.endsWith('.tmp') && name.includes(marker)) await rm(`${folder}/${name}`, { force: true }).catch(() => undefined);
    }
  }
}
