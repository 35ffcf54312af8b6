/**
 * The restore run: the plan (stages/plan.ts) resolved once, then every file not already finished
 * restored on a queue of worker threads (each runs stages/pipeline.ts: analyse -> predict -> guide ->
 * render -> write), each outcome appended to the manifest as it lands. One bad file is recorded and the
 * run goes on; a stop request lets files in progress finish and starts no new one.
 */
import { mkdir } from 'node:fs/promises';
import { availableParallelism } from 'node:os';
import { basename, dirname } from 'node:path';
import pLimit from 'p-limit';
import { ErrorCodes, isKinhueError, UsageError } from '../errors.js';
import { hostLabel, isTemporaryOfAny, leftByEndedProcess, removeTemporaryFiles, underFolder } from '../files/index.js';
import { appendManifest, terminateManifest, type ManifestRecord } from './manifest.js';
import { allOutputs, repairCompanions } from './naming.js';
import type { RestoreOptions, RestoreSettings } from './options.js';
import type { Part } from './part.js';
import { WorkerPool } from './pool.js';
import type { FileJob, FileOutcome } from './stages/pipeline.js';
import { checkOutputs, planRestore, type FileFailure, type HintsNotUsed, type PlannedFile, type RestorePlan } from './stages/plan.js';
import { serialiseError, type SerialisedError } from './worker-protocol.js';

export type { FileFailure, HintsNotUsed, PlanAction, PlannedFile, RestorePlan } from './stages/plan.js';

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
  const plan = await planRestore(options);
  const { outDir, settings, key, files, failures } = plan;
  const manifestPath = plan.manifest.path;
  const notes = [...plan.notes];
  const todo = files.filter((f) => f.action === 'run' || f.action === 'retry');
  const skipped = files.filter((f) => f.action === 'skip').length;
  if (!options.dryRun) {
    await mkdir(outDir, { recursive: true }).catch((error: unknown) => {
      throw new UsageError(
        `the output folder ${options.out} could not be created (${(error as Error).message})`,
        'choose a writable --out folder',
      );
    });
    if (plan.manifest.torn) await terminateManifest(manifestPath);
    await appendManifest(manifestPath, {
      time: new Date().toISOString(),
      start: {
        part: plan.part,
        host: plan.host,
        pid: process.pid,
        files: todo.length + skipped,
        all: plan.found,
        toRun: todo.length,
        settings: key,
      },
    });
    notes.push(...(await removeLeftovers(outDir, files, todo)));
  }
  onEvent({ type: 'plan', files, toRun: todo.length, skipped, outDir, notes, failures });

  const summary: RestoreSummary = {
    outDir,
    manifest: manifestPath,
    part: plan.part,
    found: plan.found,
    total: files.length + plan.problems,
    done: 0,
    skipped,
    failed: failures,
    hintsNotUsed: plan.hintsNotUsed,
    notRun: 0,
    interrupted: false,
    dryRun: Boolean(options.dryRun),
    seconds: 0,
    model: {
      dir: plan.model.dir,
      name: plan.model.name,
      weightsSha256: plan.model.weightsSha256,
      topologySha256: plan.model.topologySha256,
    },
    settings,
    files,
    notes,
  };
  if (options.dryRun || todo.length === 0) {
    summary.notRun = options.dryRun ? todo.length : 0;
    summary.seconds = (performance.now() - started) / 1000;
    return summary;
  }

  const workers = Math.min(plan.jobs, todo.length);
  const pool = new WorkerPool(workers, {
    modelDir: plan.model.dir,
    onnxThreads: Math.max(1, Math.floor(availableParallelism() / workers)),
  });
  const limit = pLimit(workers);
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
    const job = jobOf(plan, file);
    try {
      // Again just before writing: links may have changed since the plan.
      await checkOutputs(plan.guard, outDir, file.outputs);
      const outcome = await pool.run(job);
      if (pool.backend && summary.backend === undefined) {
        summary.backend = pool.backend;
        onEvent({ type: 'backend', name: pool.backend, warning: pool.backendWarning });
      }
      await appendManifest(manifestPath, doneRecord(file, outcome, key));
      const hints = outcome.record.guidance?.hints;
      if (hints?.ignored) summary.hintsNotUsed.push({ rel: file.rel, file: hints.file, reason: hints.ignored });
      summary.done++;
      file.status = 'done';
      onEvent({
        type: 'done',
        rel: file.rel,
        output: file.outputs.image,
        seconds: outcome.seconds,
        done: summary.done,
        failed: summary.failed.length,
        total: todo.length,
        warnings: outcome.record.warnings,
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
      for (const folder of folders) await removeTemporaryFiles(folder, (o) => o.pid === process.pid && o.host === plan.host);
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

/** The plan entry as a worker restores it. */
function jobOf(plan: RestorePlan, file: PlannedFile): FileJob {
  return {
    source: file.source,
    rel: file.rel,
    outDir: plan.outDir,
    outputs: file.outputs,
    settings: plan.settings,
    hints: file.hints,
    maxPixels: plan.maxPixels,
  };
}

function doneRecord(file: PlannedFile, outcome: FileOutcome, key: string): ManifestRecord {
  return {
    time: new Date().toISOString(),
    status: 'done',
    source: file.source,
    output: file.outputs.image,
    companions: [
      file.outputs.record,
      ...(outcome.record.result.confidenceMap ? [file.outputs.confidence] : []),
      ...repairCompanions(file.outputs, outcome.record.repair),
    ],
    size: outcome.size,
    mtimeMs: outcome.mtimeMs,
    sha256: outcome.sha256,
    hintsSha256: file.hints?.sha256 ?? null,
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
