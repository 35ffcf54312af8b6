/**
 * The restore run: discover the scans, plan their outputs, keep this part's scans when the run is one
 * part of many, read the folder's manifests, then restore every file not already finished on a queue
 * of worker threads, recording each outcome as it lands. One bad file is recorded and the run goes on;
 * a stop request lets files in progress finish and starts no new one.
 */
import { mkdir, stat } from 'node:fs/promises';
import { basename, dirname, join, resolve } from 'node:path';
import pLimit from 'p-limit';
import { ErrorCodes, isKinhueError, KinhueError, ModelError, UsageError } from '../errors.js';
import { hostLabel, identify, InputGuard, isTemporaryOfAny, leftByEndedProcess, removeTemporaryFiles } from '../files/index.js';
import { resolveMaxPixels } from '../image/index.js';
import { readModelInfo } from './model-info.js';
import { discoverInputs, underFolder } from './discovery.js';
import { appendManifest, terminateManifest, type ManifestRecord } from './manifest.js';
import { loadRunFolder, manifestName, splitCounts } from './run-folder.js';
import { checkedPart, partLabel, partOf, type Part } from './part.js';
import { planOutputs, repairOutputs, type PlannedOutputs } from './naming.js';
import { DEFAULT_MODEL_DIR, chooseDecoding } from '../model/index.js';
import { cachedReference, hintsFingerprint } from '../hints/index.js';
import { defaultJobs, settingsKey, type RestoreOptions, type RestoreSettings } from './options.js';
import { WorkerPool } from './pool.js';
import type { FileJob, ProvenanceRecord } from './restore-file.js';
import { serialiseError, type SerialisedError } from './worker-protocol.js';
import { fileSha256 } from './hash.js';
import { sharedRepairModel } from '../repair/index.js';

/**
 * What happens to one discovered file: `conflict` when the output folder holds another scan's result
 * under this scan's output name, `refuse` when an output would replace an input.
 */
export type PlanAction = 'run' | 'retry' | 'skip' | 'conflict' | 'refuse';

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

/** A hints file (or the --hints folder) that was not used: the scan was restored without its guidance. */
export interface HintsNotUsed {
  /** The scan, relative to the inputs' base; absent for the --hints folder itself. */
  rel?: string;
  file: string;
  reason: string;
}

export type RestoreEvent =
  | { type: 'plan'; files: PlannedFile[]; toRun: number; skipped: number; outDir: string; notes: string[]; failures: FileFailure[] }
  | { type: 'backend'; name: string; warning?: string }
  | { type: 'start'; rel: string }
  | { type: 'done'; rel: string; output: string; seconds: number; done: number; failed: number; total: number; warnings: string[] }
  | { type: 'failed'; rel: string; failure: FileFailure; done: number; failed: number; total: number }
  | { type: 'stopping'; hard: boolean };

export interface RestoreSummary {
  outDir: string;
  /** The manifest this run appends to. */
  manifest: string;
  /** The part of a split run; null for a run of all scans. */
  part: Part | null;
  /** Scans found in all parts. */
  found: number;
  /** Files found (of this part), plus inputs that could not be searched (unreadable folders, broken links). */
  total: number;
  /** Restored in this run. */
  done: number;
  /** Already finished by an earlier run with the same settings. */
  skipped: number;
  /** Files that failed, inputs that could not be searched, conflicts and refused outputs. */
  failed: FileFailure[];
  /** Hints files not used (malformed, unreadable) and a --hints folder that does not exist. */
  hintsNotUsed: HintsNotUsed[];
  /** Not started (or not finished) because the run was stopped. */
  notRun: number;
  interrupted: boolean;
  dryRun: boolean;
  seconds: number;
  backend?: string;
  model: { dir: string; name: string; weightsSha256: string; topologySha256: string };
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
  const maxPixels = resolveMaxPixels(options.maxPixels);
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
    ...(options.skin === false ? { skin: false as const } : {}),
    ...(options.repair || options.repairedScan ? { repair: await repairSettings() } : {}),
    ...(options.repairedScan ? { repairedScan: true as const } : {}),
  };
  // A reference that cannot be used (grey, missing, not an image) stops the run before it starts.
  if (settings.reference) await cachedReference(settings.reference);
  const key = settingsKey(settings);
  const hintsNotUsed: HintsNotUsed[] = [];
  if (typeof settings.hints === 'string') {
    const folder = await stat(settings.hints).catch(() => undefined);
    if (!folder?.isDirectory()) {
      hintsNotUsed.push({
        file: settings.hints,
        reason: `${folder ? 'is not a folder' : 'does not exist'}: the --hints folder was not searched (hints files beside the scans were still used)`,
      });
    }
  }

  const part = options.part ? checkedPart(options.part.index, options.part.count, 'part') : null;
  const discovery = await discoverInputs(options.inputs, outDir);
  const inPart = (rel: string): boolean => !part || partOf(rel, part.count) === part.index;
  const notes = [...model.warnings, ...discovery.notes];
  const problems = discovery.problems.filter((p) => inPart(p.rel));
  const failures: FileFailure[] = problems.map((p) => ({ source: p.path, rel: p.rel, code: p.code, message: p.message, hint: p.hint }));
  const guard = await InputGuard.of(discovery.files.map((f) => f.path), {
    hint: 'choose an --out folder that is not your scans folder and holds no link to it', outsideInputFolders: true,
  });
  // Outputs are named over all scans found, so every part names them alike; then each part keeps its own.
  const allOutputs = planOutputs(discovery.files, settings.format);
  const mine = discovery.files.flatMap((f, i) => (inPart(allOutputs[i]!.image) ? [{ f, o: allOutputs[i]! }] : []));
  const host = hostLabel();
  const ownName = manifestName(part, host);
  const manifestPath = join(outDir, ownName);
  await guard.check(manifestPath);
  const run = await loadRunFolder(outDir, ownName);
  const splits = splitCounts(run);
  if (part && splits.some((count) => count !== part.count)) {
    throw new UsageError(
      `the output folder ${options.out} holds parts of a run split into ${splits.join(' and ')} parts; ${partLabel(part)} would share outputs with them`,
      `split this run into ${splits[0]} parts as before (--part K/${splits[0]}, or --part-count ${splits[0]}), or, once no part runs any more, finish it on one machine without --part`,
    );
  }
  notes.push(...run.notes);
  const previous = run.records;
  const files: PlannedFile[] = [];
  for (const { f, o } of mine) {
    const last = previous.get(o.image);
    const hintsSha256 = settings.hints === false ? null : await hintsFingerprint(f.path, settings.hints || undefined, f.rel);
    const file: PlannedFile = { source: f.path, rel: f.rel, outputs: o, hintsSha256, action: last?.status === 'failed' ? 'retry' : 'run', status: 'planned' };
    const fail = (action: PlanAction, error: KinhueError): void => {
      file.action = action;
      file.status = 'failed';
      failures.push({ source: f.path, rel: f.rel, code: error.code, message: error.message, hint: error.hint });
    };
    const refused = await checkOutputs(guard, outDir, o).catch((error: unknown) => error as KinhueError);
    if (refused) fail('refuse', refused);
    else if (!options.force && last && (await conflicting(f.path, outDir, o, last))) {
      fail('conflict', new KinhueError(ErrorCodes.OUTPUT_CONFLICT, `the output folder holds the result of another scan, ${last.source}, under this scan's name ${o.image}`, {
        file: f.path,
        hint: 'restore this album into its own --out folder, or add --force to replace the earlier result',
      }));
    } else if (
      !options.force && last?.status === 'done' && last.settings === key && (last.hintsSha256 ?? null) === hintsSha256 &&
      (await stillFinished(f.path, outDir, o, last))
    ) {
      file.action = 'skip';
      file.status = 'skipped';
    }
    files.push(file);
  }
  const todo = files.filter((f) => f.action === 'run' || f.action === 'retry');
  const skipped = files.filter((f) => f.action === 'skip').length;
  if (!options.dryRun) {
    await mkdir(outDir, { recursive: true }).catch((error: unknown) => {
      throw new UsageError(`the output folder ${options.out} could not be created (${(error as Error).message})`, 'choose a writable --out folder');
    });
    if (run.manifests.find((m) => m.name === ownName)?.contents.torn) await terminateManifest(manifestPath);
    await appendManifest(manifestPath, {
      time: new Date().toISOString(),
      start: { part, host, pid: process.pid, files: todo.length + skipped, all: discovery.files.length, toRun: todo.length, settings: key },
    });
    notes.push(...(await removeLeftovers(outDir, files, todo)));
  }
  onEvent({ type: 'plan', files, toRun: todo.length, skipped, outDir, notes, failures });

  const summary: RestoreSummary = {
    outDir, manifest: manifestPath, part, found: discovery.files.length, total: files.length + problems.length,
    done: 0, skipped, failed: failures, hintsNotUsed,
    notRun: 0, interrupted: false, dryRun: Boolean(options.dryRun), seconds: 0,
    model: { dir: modelDir, name: model.name, weightsSha256: model.weightsSha256, topologySha256: model.topologySha256 }, settings, files, notes,
  };
  if (options.dryRun || todo.length === 0) {
    summary.notRun = options.dryRun ? todo.length : 0;
    summary.seconds = (performance.now() - started) / 1000;
    return summary;
  }

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
    const job: FileJob = { source: file.source, rel: file.rel, outDir, outputs: file.outputs, settings, maxPixels };
    try {
      // Again just before writing: links may have changed since the plan.
      await checkOutputs(guard, outDir, file.outputs);
      const outcome = await pool.run(job);
      if (pool.backend && summary.backend === undefined) {
        summary.backend = pool.backend;
        onEvent({ type: 'backend', name: pool.backend, warning: pool.backendWarning });
      }
      await appendManifest(manifestPath, doneRecord(file, outcome.record, outcome, key));
      const hints = outcome.record.guidance?.hints;
      if (hints?.ignored) summary.hintsNotUsed.push({ rel: file.rel, file: hints.file, reason: hints.ignored });
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
    if (hard) {
      const folders = new Set(todo.map((f) => dirname(underFolder(outDir, f.outputs.image))));
      for (const folder of folders) await removeTemporaryFiles(folder, (o) => o.pid === process.pid && o.host === host);
    }
  }
  if (fatal) throw fatal;
  for (const f of todo) if (f.status === 'planned') f.status = 'not-run';
  summary.notRun = todo.filter((f) => f.status === 'not-run').length;
  summary.interrupted = stopping && summary.notRun > 0;
  summary.seconds = (performance.now() - started) / 1000;
  return summary;
}

/**
 * Removes temporary files that no run will finish, in the output folder and the folders this run
 * writes to: those of this machine's processes that have ended, and those of another machine for
 * this run's own outputs (an earlier attempt at this part, on another node; no other part ever
 * writes these outputs). Another machine's temporary files for other outputs may belong to a part
 * at work there, and are kept. Returns notes for people.
 */
async function removeLeftovers(outDir: string, files: PlannedFile[], todo: PlannedFile[]): Promise<string[]> {
  const own = new Map<string, Set<string>>();
  for (const file of files) {
    for (const rel of allOutputs(file.outputs)) {
      const path = underFolder(outDir, rel);
      const names = own.get(dirname(path)) ?? new Set<string>();
      names.add(basename(path));
      own.set(dirname(path), names);
    }
  }
  const host = hostLabel();
  const folders = new Set([outDir, ...todo.map((f) => dirname(underFolder(outDir, f.outputs.image)))]);
  let stale = 0;
  for (const folder of folders) {
    const names = own.get(folder) ?? new Set<string>();
    const leftOver = (owner: { pid: number; host?: string }, name: string): boolean =>
      leftByEndedProcess(owner) || (owner.host !== undefined && owner.host !== host && isTemporaryOfAny(name, names));
    stale += (await removeTemporaryFiles(folder, leftOver)).length;
  }
  return stale ? [`removed ${stale} temporary file${stale === 1 ? '' : 's'} left by an earlier run that was stopped`] : [];
}

/** Throws OutputOnInputError when one of a scan's outputs would replace an input. */
async function checkOutputs(guard: InputGuard, outDir: string, outputs: PlannedOutputs): Promise<void> {
  for (const rel of allOutputs(outputs)) await guard.check(underFolder(outDir, rel));
}

/** The shipped repair model's identity, read (and its files checked) before any scan starts. */
async function repairSettings(): Promise<NonNullable<RestoreSettings['repair']>> {
  const { meta } = await sharedRepairModel();
  return { model: meta.name, weightsSha256: meta.weightsSha256, detection: meta.detection, threshold: meta.threshold, fill: meta.fill };
}

/** Every file a scan's result may have, repair outputs included. */
function allOutputs(outputs: PlannedOutputs): string[] {
  const repair = repairOutputs(outputs);
  return [outputs.image, outputs.confidence, outputs.record, repair.mask, repair.scan];
}

/** The repair outputs a finished result has (none when it was not repaired). */
function repairCompanions(outputs: PlannedOutputs, record: ProvenanceRecord): string[] {
  if (!record.repair) return [];
  const names = repairOutputs(outputs);
  return [names.mask, ...(record.repair.scan ? [names.scan] : [])];
}

/**
 * True when the output folder holds, under this scan's output name, what an earlier run made from
 * another scan: a different source path that is not the same file (a link) nor the same bytes (a moved
 * album), with some of its result still there.
 */
async function conflicting(source: string, outDir: string, outputs: PlannedOutputs, last: ManifestRecord): Promise<boolean> {
  if (last.source === source) return false;
  const present = await Promise.all([outputs.image, outputs.record, outputs.confidence].map((rel) => stat(underFolder(outDir, rel)).then(() => true, () => false)));
  if (!present.some(Boolean)) return false;
  const [now, then] = await Promise.all([identify(source), identify(last.source)]);
  if (now.id && now.id === then.id) return false;
  if (last.sha256) {
    const sha = await fileSha256(source).catch(() => undefined);
    if (sha === last.sha256) return false;
  }
  return true;
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
    companions: [file.outputs.record, ...(record.result.confidenceMap ? [file.outputs.confidence] : []), ...repairCompanions(file.outputs, record)],
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
