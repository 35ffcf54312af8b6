/**
 * A model folder's files as one unit: `weights.bin`, `model.json` (the network's layout), for a network
 * that reads a borrowed backbone `backbone.json` and `backbone.bin`, and `kinhue-model.json`, which holds
 * the SHA-256 of the others. Readers get a set whose hashes agree or a ModelError naming the file at fault;
 * a writer never leaves a folder readers refuse, even when killed.
 *
 * Writing: the new set is built whole in a staging folder inside the model folder, then each file is linked
 * into place by rename. Until the staging folder is removed, a reader that finds the top-level files
 * disagreeing (a save under way, or killed half-way) reads the staged set instead; the next save finishes a
 * dead process's swap and removes its leftovers. Other files (model card, training log, checkpoint) are
 * never touched.
 */
import { randomBytes } from 'node:crypto';
import { copyFile, link, mkdir, readdir, readFile, rename, rm, stat, writeFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { ModelError } from '../errors.js';
import { hostLabel, leftByEndedProcess, ownerNamed, type TemporaryOwner, temporaryOwner } from '../files/temp-name.js';
import { sha256 } from './digest.js';
import { BACKBONE_MISSING_HINT, BACKBONE_TOPOLOGY_FILE, BACKBONE_WEIGHTS_FILE, checkBackboneFiles } from './backbone.js';
import { METADATA_FILE, type ModelMetadata, parseMetadata, TOPOLOGY_FILE, WEIGHTS_FILE } from './metadata.js';

/** A consistent set of a model folder's files, as read. */
export interface ModelFiles {
  meta: ModelMetadata;
  weights: Buffer;
  topology: Buffer;
  /** SHA-256 of model.json as read (recorded in provenance even where the metadata predates the field). */
  topologySha256: string;
  /** The backbone's files, when the metadata names one (checked against its hashes). */
  backbone?: { topology: Buffer; weights: Buffer };
  /** Things a user should know, e.g. that an older folder's layout could not be checked. */
  warnings: string[];
}

/** The files of a new set, ready to write. */
export interface ModelFileSet {
  weights: Uint8Array;
  topology: string;
  metadata: string;
  backbone?: { topology: Uint8Array; weights: Uint8Array };
}

/**
 * Staging folders and swap files are named `<prefix><pid>@<host>.<random>` (before the machine's name was
 * added, `<prefix><pid>-<random>`; a host name holds no '.', so the two cannot be confused), so a later save can tell a dead writer's as files/temp-name.ts does.
 */
const STAGING_PREFIX = '.kinhue-save-';
const TEMP_PREFIX = '.kinhue-swap-';
/** The order files are swapped in (those a set has); the metadata last, so an undisturbed reader sees it change last. */
const FILES = [BACKBONE_TOPOLOGY_FILE, BACKBONE_WEIGHTS_FILE, WEIGHTS_FILE, TOPOLOGY_FILE, METADATA_FILE] as const;

const REPLACE_HINT = 'restore the folder from where it came (for the shipped model: reinstall kinhue), or train or tune it again';
const OTHER_HINT = 'pass a folder written by kinhue train or tune, or leave the model option out to use the shipped model';

export { sha256 };

async function readOrFail(dir: string, name: string, shown: string): Promise<Buffer> {
  try {
    return await readFile(join(dir, name));
  } catch (error) {
    const missing = (error as NodeJS.ErrnoException).code === 'ENOENT';
    throw new ModelError(missing ? `not a kinhue model: ${name} is missing` : `${name} cannot be read`, {
      file: shown,
      hint: missing ? OTHER_HINT : "check the folder's permissions",
      cause: error,
    });
  }
}

/** Reads the set at `dir` and checks its hashes; errors name `shown` (the folder as the user gave it). */
async function readSet(dir: string, shown: string): Promise<ModelFiles> {
  const metaText = await readOrFail(dir, METADATA_FILE, shown);
  let json: unknown;
  try {
    json = JSON.parse(metaText.toString('utf8'));
  } catch (error) {
    throw new ModelError(`${METADATA_FILE} is not valid JSON`, { file: shown, hint: REPLACE_HINT, cause: error });
  }
  const meta = parseMetadata(json, shown);
  const weights = await readOrFail(dir, WEIGHTS_FILE, shown);
  if (sha256(weights) !== meta.weightsSha256) {
    throw new ModelError(`${WEIGHTS_FILE} does not match the SHA-256 in ${METADATA_FILE}: the weights are damaged or were replaced`, {
      file: shown,
      hint: REPLACE_HINT,
    });
  }
  const topology = await readOrFail(dir, TOPOLOGY_FILE, shown);
  const topologySha256 = sha256(topology);
  const warnings: string[] = [];
  if (meta.topologySha256 === undefined) {
    warnings.push(
      `${shown}: ${METADATA_FILE} predates the ${TOPOLOGY_FILE} hash, so the network's layout was not checked; ` +
        'tune or train the model again with this kinhue to record it',
    );
  } else if (topologySha256 !== meta.topologySha256) {
    throw new ModelError(`${TOPOLOGY_FILE} does not match the SHA-256 in ${METADATA_FILE}: the network's layout was edited or replaced`, {
      file: join(shown, TOPOLOGY_FILE),
      hint: REPLACE_HINT,
    });
  }
  if (!meta.backbone) return { meta, weights, topology, topologySha256, warnings };
  const backboneFile = async (name: string): Promise<Buffer> =>
    readFile(join(dir, name)).catch((error: unknown) => {
      throw new ModelError(`the model's backbone could not be read: ${name} is missing or unreadable`, {
        file: shown,
        hint: BACKBONE_MISSING_HINT,
        cause: error,
      });
    });
  const backbone = { topology: await backboneFile(BACKBONE_TOPOLOGY_FILE), weights: await backboneFile(BACKBONE_WEIGHTS_FILE) };
  checkBackboneFiles(backbone.topology, backbone.weights, meta.backbone, shown);
  return { meta, weights, topology, topologySha256, warnings, backbone };
}

/** Staging folders in `dir`, newest first. */
async function stagingFolders(dir: string): Promise<string[]> {
  const names = await readdir(dir).catch(() => [] as string[]);
  const found: { path: string; time: number }[] = [];
  for (const name of names) {
    if (!name.startsWith(STAGING_PREFIX)) continue;
    const info = await stat(join(dir, name)).catch(() => undefined);
    if (info?.isDirectory()) found.push({ path: join(dir, name), time: info.mtimeMs });
  }
  return found.sort((x, y) => y.time - x.time).map((f) => f.path);
}

/**
 * Reads a model folder's files and checks them against the hashes in its metadata. A folder whose files
 * disagree while a whole staged set lies beside them (a save under way, or one killed half-way) gives the
 * staged set. Throws ModelError naming the folder (or the file at fault).
 *
 * @example
 *   const { meta, weights, topology } = await readModelFiles('models/kinhue-base');
 */
export async function readModelFiles(dir: string): Promise<ModelFiles> {
  const abs = resolve(dir);
  const info = await stat(abs).catch((error: unknown) => {
    throw new ModelError('model folder not found', {
      file: dir,
      hint: 'check the path, or leave the model option out to use the shipped model',
      cause: error,
    });
  });
  if (!info.isDirectory())
    throw new ModelError('a model is a folder, this is a file', { file: dir, hint: `pass the folder that holds ${METADATA_FILE}` });
  try {
    return await readSet(abs, dir);
  } catch (error) {
    for (const staged of await stagingFolders(abs)) {
      try {
        return await readSet(staged, dir);
      } catch {
        // Incomplete (still being written) or already being removed: try the next, then the folder again.
      }
    }
    // A swap may have finished while the first read ran.
    try {
      return await readSet(abs, dir);
    } catch {
      throw error;
    }
  }
}

/** The owner in a staging folder's or swap file's name (`<pid>@<host>.` or `<pid>-` after the prefix). */
const WRITER = /^(\d+)(?:@([A-Za-z0-9-]+)\.|-)/;

/** Temporary model files of older kinhue, `<name>.<pid>.<base-36 token>.tmp`. */
const OLDER_TEMP = /\.(\d+)\.[0-9a-z]+\.tmp$/;

/** Who wrote a staging folder, swap file or single-file temporary (checkpoints, logs), or undefined for names that are not ours. */
function writerOf(name: string): TemporaryOwner | undefined {
  const prefix = [STAGING_PREFIX, TEMP_PREFIX].find((p) => name.startsWith(p));
  if (prefix === undefined) {
    const older = OLDER_TEMP.exec(name);
    return temporaryOwner(name) ?? (older ? ownerNamed(older[1]!, undefined) : undefined);
  }
  const match = WRITER.exec(name.slice(prefix.length));
  return match ? ownerNamed(match[1]!, match[2]) : undefined;
}

/** `<pid>@<host>.<random>`: this writer's part of a staging or swap name. */
function writerToken(): string {
  return `${process.pid}@${hostLabel()}.${randomBytes(4).toString('hex')}`;
}

/** Links (or, where links are not allowed, copies) a staged file to a temporary name in `dir`, then renames it into place. */
async function place(staged: string, dir: string, name: string): Promise<void> {
  const temp = join(dir, `${TEMP_PREFIX}${writerToken()}-${name}`);
  try {
    await link(join(staged, name), temp).catch(() => copyFile(join(staged, name), temp));
    await rename(temp, join(dir, name));
  } finally {
    // rename() leaves both names when they already link the same file (a swap being finished a second time).
    await rm(temp, { force: true });
  }
}

/**
 * Removes what dead writers left in a model folder: a staged set whose swap was cut short is finished first
 * (so the folder's own files agree again), then staging folders and temporary files go. Files of live
 * processes are left alone.
 *
 * @example
 *   await tidyModelFolder('models/mine'); // at the start of a training run
 */
export async function tidyModelFolder(dir: string): Promise<void> {
  const names = await readdir(dir).catch(() => [] as string[]);
  const dead = names.filter((name) => {
    const writer = writerOf(name);
    return writer !== undefined && leftByEndedProcess(writer);
  });
  if (dead.length === 0) return;
  const folderWhole = await readSet(dir, dir).then(
    () => true,
    () => false,
  );
  if (!folderWhole) {
    for (const staged of await stagingFolders(dir)) {
      if (!dead.some((name) => join(dir, name) === staged)) continue;
      const names = await readdir(staged).catch(() => [] as string[]);
      if (
        !(await readSet(staged, dir).then(
          () => true,
          () => false,
        ))
      )
        continue;
      for (const name of FILES) if (names.includes(name)) await place(staged, dir, name);
      break;
    }
  }
  for (const name of dead) await rm(join(dir, name), { recursive: true, force: true });
}

/**
 * Writes a model's files into `dir` (created if needed) as one unit: staged whole, then swapped in.
 * Readers (readModelFiles) see the old set or the new one, also when this process is killed at any point.
 *
 * @example
 *   await writeModelFiles('models/mine', { weights, topology: JSON.stringify(layout), metadata });
 */
export async function writeModelFiles(dir: string, files: ModelFileSet): Promise<void> {
  await mkdir(dir, { recursive: true });
  await tidyModelFolder(dir);
  const staged = join(dir, `${STAGING_PREFIX}${writerToken()}`);
  let swapping = false;
  try {
    await mkdir(staged);
    if (files.backbone) {
      await writeFile(join(staged, BACKBONE_TOPOLOGY_FILE), files.backbone.topology);
      await writeFile(join(staged, BACKBONE_WEIGHTS_FILE), files.backbone.weights);
    }
    await writeFile(join(staged, WEIGHTS_FILE), files.weights);
    await writeFile(join(staged, TOPOLOGY_FILE), files.topology);
    // Written last: a staged set is whole once its metadata is there and agrees with the rest.
    await writeFile(join(staged, METADATA_FILE), files.metadata);
    swapping = true;
    const backboneFiles: string[] = [BACKBONE_TOPOLOGY_FILE, BACKBONE_WEIGHTS_FILE];
    for (const name of FILES) if (files.backbone || !backboneFiles.includes(name)) await place(staged, dir, name);
  } catch (error) {
    // A swap that failed half-way keeps its staged set: readers use it, and the next save finishes the swap.
    if (!swapping) await rm(staged, { recursive: true, force: true });
    throw error;
  }
  await rm(staged, { recursive: true, force: true });
}
