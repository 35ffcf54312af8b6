/**
 * Stage 1, plan: every option resolved once into one RestorePlan before anything runs. Reads the model
 * folder's identity, discovers the scans, names their outputs over all of them (so every part of a split
 * run names them alike), keeps this part's share, reads the output folder's manifests, reads each scan's
 * hints file (its text travels with the entry, so the hash recorded is that of the hints used), checks the
 * reference photos, and decides per scan: run, retry, skip, conflict or refuse. Writes nothing.
 */
import { stat } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { ErrorCodes, KinhueError, ModelError, UsageError } from '../../errors.js';
import { discoverInputs, hostLabel, identify, InputGuard, underFolder } from '../../files/index.js';
import { resolveMaxPixels } from '../../image/index.js';
import { cachedReference, findHints, type HintsSource } from '../../hints/index.js';
import { cachedMemoryPhotos } from '../memory.js';
import { chooseDecoding, DEFAULT_MODEL_DIR, type Decoding } from '../../model/index.js';
import { fileSha256 } from '../hash.js';
import type { ManifestRecord } from '../manifest.js';
import { readModelInfo, type ModelInfo } from '../model-info.js';
import { allOutputs, planOutputs, type PlannedOutputs } from '../naming.js';
import { sharedRepairModel } from '../../repair/index.js';
import { defaultJobs, RESTORE_DEFAULTS, settingsKey, type RestoreOptions, type RestoreSettings } from '../options.js';
import { checkedPart, partLabel, partOf, type Part } from '../part.js';
import { loadRunFolder, manifestName, splitCounts } from '../run-folder.js';

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
  /** The scan's hints file as read for the plan; null when it has none or hints are off. */
  hints: HintsSource | null;
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

/** Everything a run will do, resolved once. */
export interface RestorePlan {
  outDir: string;
  model: ModelInfo;
  /** The settings that shape every result, and their key in the manifest. */
  settings: RestoreSettings;
  key: string;
  jobs: number;
  maxPixels: number;
  /** The part of a split run; null for a run of all scans. */
  part: Part | null;
  /** This machine's manifest in the output folder, and whether its last line was cut short. */
  manifest: { name: string; path: string; torn: boolean };
  host: string;
  /** Scans found in all parts. */
  found: number;
  /** This part's scans, with what is to happen to each. */
  files: PlannedFile[];
  /** Inputs of this part that could not be searched (unreadable folders, broken links). */
  problems: number;
  /** Those inputs, and the files refused or in conflict. */
  failures: FileFailure[];
  hintsNotUsed: HintsNotUsed[];
  notes: string[];
  /** Refuses an output that would replace an input (checked again just before each file is written). */
  guard: InputGuard;
}

/**
 * Resolves a restore run. Throws UsageError or ModelError when the run cannot start.
 * @example
 *   const plan = await planRestore({ inputs: ['scans/'], out: 'restored/' });
 */
export async function planRestore(options: RestoreOptions): Promise<RestorePlan> {
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
  const decoding = chooseDecoding(options, model.decoding);
  const settings: RestoreSettings = {
    model: model.name,
    weightsSha256: model.weightsSha256,
    workSize: options.workSize ?? model.workingSize,
    decoding,
    temperature: options.temperature ?? model.temperature,
    ...vividnessSetting(decoding, options.vividness ?? model.vividness),
    format: options.format ?? RESTORE_DEFAULTS.format,
    quality: options.quality ?? null,
    confidence: options.confidence ?? RESTORE_DEFAULTS.confidence,
    ...(options.hints !== undefined ? { hints: options.hints === false ? false : resolve(options.hints) } : {}),
    ...(options.reference ? { reference: resolve(options.reference) } : {}),
    ...(options.skin === false ? { skin: false as const } : {}),
    ...(options.repair || options.repairedScan ? { repair: await repairSettings() } : {}),
    ...(options.repairedScan ? { repairedScan: true as const } : {}),
  };
  // A reference or memory that cannot be used (grey, missing, not an image) stops the run before it starts.
  if (settings.reference) await cachedReference(settings.reference);
  if (options.memory) {
    const memory = await cachedMemoryPhotos(options.memory, settings.workSize, maxPixels);
    settings.memory = { folder: memory.folder, sha256: memory.sha256 };
  }
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
  const discovery = await discoverInputs(options.inputs, { outDir, example: 'Example usage: kinhue restore scans/ --out restored/' });
  const inPart = (rel: string): boolean => !part || partOf(rel, part.count) === part.index;
  const notes = [...model.warnings, ...discovery.notes];
  const problems = discovery.problems.filter((p) => inPart(p.rel));
  const failures: FileFailure[] = problems.map((p) => ({ source: p.path, rel: p.rel, code: p.code, message: p.message, hint: p.hint }));
  const guard = await InputGuard.of(
    discovery.files.map((f) => f.path),
    {
      hint: 'choose an --out folder that is not your scans folder and holds no link to it',
      outsideInputFolders: true,
    },
  );
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
    const hints = settings.hints === false ? null : await findHints(f.path, { hintsDir: settings.hints || undefined, relative: f.rel });
    const hintsSha256 = hints?.sha256 ?? null;
    const file: PlannedFile = {
      source: f.path,
      rel: f.rel,
      outputs: o,
      hints,
      action: last?.status === 'failed' ? 'retry' : 'run',
      status: 'planned',
    };
    const fail = (action: PlanAction, error: KinhueError): void => {
      file.action = action;
      file.status = 'failed';
      failures.push({ source: f.path, rel: f.rel, code: error.code, message: error.message, hint: error.hint });
    };
    const refused = await checkOutputs(guard, outDir, o).catch((error: unknown) => error as KinhueError);
    if (refused) fail('refuse', refused);
    else if (!options.force && last && (await conflicting(f.path, outDir, o, last))) {
      fail(
        'conflict',
        new KinhueError(
          ErrorCodes.OUTPUT_CONFLICT,
          `the output folder holds the result of another scan, ${last.source}, under this scan's name ${o.image}`,
          {
            file: f.path,
            hint: 'restore this album into its own --out folder, or add --force to replace the earlier result',
          },
        ),
      );
    } else if (
      !options.force &&
      last?.status === 'done' &&
      last.settings === key &&
      (last.hintsSha256 ?? null) === hintsSha256 &&
      (await stillFinished(f.path, outDir, o, last))
    ) {
      file.action = 'skip';
      file.status = 'skipped';
    }
    files.push(file);
  }
  return {
    outDir,
    model,
    settings,
    key,
    jobs,
    maxPixels,
    part,
    host,
    manifest: { name: ownName, path: manifestPath, torn: Boolean(run.manifests.find((m) => m.name === ownName)?.contents.torn) },
    found: discovery.files.length,
    files,
    problems: problems.length,
    failures,
    hintsNotUsed,
    notes,
    guard,
  };
}

/** Throws OutputOnInputError when one of a scan's outputs would replace an input. */
export async function checkOutputs(guard: InputGuard, outDir: string, outputs: PlannedOutputs): Promise<void> {
  for (const rel of allOutputs(outputs)) await guard.check(underFolder(outDir, rel));
}

/**
 * True when the output folder holds, under this scan's output name, what an earlier run made from
 * another scan: a different source path that is not the same file (a link) nor the same bytes (a moved
 * album), with some of its result still there.
 */
async function conflicting(source: string, outDir: string, outputs: PlannedOutputs, last: ManifestRecord): Promise<boolean> {
  if (last.source === source) return false;
  const present = await Promise.all(
    [outputs.image, outputs.record, outputs.confidence].map((rel) =>
      stat(underFolder(outDir, rel)).then(
        () => true,
        () => false,
      ),
    ),
  );
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

/** The shipped repair model's identity, read (and its files checked) before any scan starts. */
async function repairSettings(): Promise<NonNullable<RestoreSettings['repair']>> {
  const { meta } = await sharedRepairModel();
  return { model: meta.name, weightsSha256: meta.weightsSha256, detection: meta.detection, threshold: meta.threshold, fill: meta.fill };
}

/** The settings entry for least-CIEDE2000's vividness: absent at 0 and for annealed mean, so earlier runs keep their key. */
function vividnessSetting(decoding: Decoding, vividness: number): { vividness?: number } {
  return decoding === 'least-ciede2000' && vividness > 0 ? { vividness } : {};
}
