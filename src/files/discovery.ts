/**
 * Finding images, for every command that reads them (restore's scans, score's originals, training
 * photos, reference photos): one list of extensions; named files, folders searched recursively, and glob
 * patterns, in a deterministic order (sorted by path), with the output folder kept out of the search. Paths are
 * compared by where they really lead (links, bind mounts), so each scan is found once, and an
 * output folder that is an input folder under another name is refused.
 */
import { lstat, readdir, stat } from 'node:fs/promises';
import { dirname, extname, join, relative, resolve, sep } from 'node:path';
import { glob, isDynamicPattern } from 'tinyglobby';
import { ErrorCodes, UsageError } from '../errors.js';
import { identify, isInside, isWithin, statId } from './identity.js';
import { walkFolder, type WalkProblem } from './folder-walk.js';

/** Extensions searched for in folders and globs (case-insensitive): the formats kinhue reads. A file named directly is always tried. */
export const IMAGE_EXTENSIONS: readonly string[] = ['.jpg', '.jpeg', '.jpe', '.png', '.tif', '.tiff', '.webp', '.gif', '.avif'];

export interface SourceFile {
  /** Absolute path. */
  path: string;
  /** Path relative to the common base of all inputs, with '/' separators: the layout mirrored under --out. */
  rel: string;
}

/** An input that could not be searched or followed: reported like a file that failed, and the run goes on. */
export interface InputProblem {
  path: string;
  /** Relative to the inputs' common base when inside it, else the path. */
  rel: string;
  code: string;
  message: string;
  hint: string;
}

export interface Discovery {
  files: SourceFile[];
  /** The folder every `rel` is relative to. */
  base: string;
  /** Things worth telling the person (e.g. that the output folder inside an input folder was skipped). */
  notes: string[];
  /** Folders that could not be read and links that lead nowhere. */
  problems: InputProblem[];
}

/** Where discovery looks and how its usage errors end. */
export interface DiscoveryOptions {
  /** The output folder, kept out of the search and refused as an input; none for commands that write no folder. */
  outDir?: string;
  /** The example closing a usage error, e.g. 'Example usage: kinhue restore scans/ --out restored/'. */
  example: string;
}

/**
 * True for a path named like an image kinhue reads.
 * @example
 *   hasImageExtension('scans/barn.TIF'); // true
 */
export function hasImageExtension(path: string): boolean {
  return IMAGE_EXTENSIONS.includes(extname(path).toLowerCase());
}

/**
 * The images directly in a folder (not its subfolders), as paths in name order: the photos of a
 * reference or memory folder, which name one set of colour photographs rather than a tree of scans.
 * @example
 *   await folderImages('family-colour'); // ['family-colour/1968-garden.jpg', ...]
 */
export async function folderImages(folder: string): Promise<string[]> {
  return (await readdir(folder))
    .filter(hasImageExtension)
    .sort()
    .map((name) => join(folder, name));
}

/** The folder a glob pattern starts from: its segments before the first one with a wildcard. */
function globBase(pattern: string): string {
  const parts = pattern.split(/[\\/]/);
  const fixed: string[] = [];
  for (const part of parts) {
    if (isDynamicPattern(part)) break;
    fixed.push(part);
  }
  if (fixed.length === parts.length) fixed.pop();
  return resolve(fixed.join('/') || '.');
}

function commonBase(dirs: string[]): string {
  let base = dirs[0]!;
  for (const d of dirs.slice(1)) {
    while (!isInside(d, base)) {
      const up = dirname(base);
      if (up === base) break;
      base = up;
    }
  }
  return base;
}

/** What went wrong with a folder or a link, in words, with the next step. */
function describeProblem(problem: WalkProblem): { message: string; hint: string } {
  const code = problem.error.code;
  if (problem.kind === 'link') {
    return {
      message:
        code === 'ELOOP'
          ? 'is a link that leads round in a loop'
          : code === 'ENOENT'
            ? 'is a link to a file or folder that does not exist'
            : `is a link that cannot be followed (${code})`,
      hint: 'fix or remove the link, then run again',
    };
  }
  const denied = code === 'EACCES' || code === 'EPERM';
  return {
    message: `the folder cannot be read (${denied ? 'permission denied' : (code ?? problem.error.message)}); the scans in it were not searched`,
    hint: denied
      ? 'give your user read permission on the folder, then run again'
      : 'check the folder and that the drive or share is available, then run again',
  };
}

/**
 * Lists the image files named by `inputs`, each with its path relative to the inputs' common base.
 * Throws UsageError when an input does not exist, when nothing usable is found, or when an input lies
 * in `outDir` (the same folder under any name). Unreadable folders and broken links are `problems`.
 * @example
 *   const { files } = await discoverInputs(['scans/', 'loose/*.tif'], 'restored');
 */
export async function discoverInputs(inputs: string[], options: DiscoveryOptions): Promise<Discovery> {
  const outDir = options.outDir;
  const out = outDir === undefined ? undefined : await identify(outDir);
  const inOut = async (path: string): Promise<boolean> => (out ? isWithin(path, out) : false);
  const roots: string[] = [];
  const found = new Map<string, string>(); // device:inode -> the first path that led there
  const notes: string[] = [];
  const walkProblems: WalkProblem[] = [];
  const seenFolders = new Set<string>();
  let outSkipped = false;
  const example = options.example;
  const add = (path: string, id: string): void => {
    if (!found.has(id)) found.set(id, path);
  };

  for (const input of inputs) {
    const abs = resolve(input);
    const info = await stat(abs).catch((error: NodeJS.ErrnoException) => error);
    if (!(info instanceof Error) && info.isDirectory()) {
      if (await inOut(abs)) {
        throw new UsageError(
          `the input folder ${input} is the output folder ${outDir} (or inside it), perhaps through a link\n${example}`,
          'choose an --out folder outside your scans',
        );
      }
      roots.push(abs);
      if (out && (await isWithin(out, await identify(abs)))) outSkipped = true;
      const walked = await walkFolder(abs, { wanted: hasImageExtension, skip: new Set(out?.id ? [out.id] : []) }, seenFolders);
      for (const f of walked.files) add(f.path, f.id);
      walkProblems.push(...walked.problems);
    } else if (!(info instanceof Error)) {
      if (await inOut(abs)) {
        throw new UsageError(
          `the scan ${input} lies in the output folder ${outDir}, perhaps through a link; its result would replace it\n${example}`,
          'choose an --out folder outside your scans',
        );
      }
      roots.push(dirname(abs));
      add(abs, statId(info));
    } else if (
      await lstat(abs).then(
        () => true,
        () => false,
      )
    ) {
      walkProblems.push({ path: abs, kind: 'link', error: info });
    } else if (isDynamicPattern(input)) {
      roots.push(globBase(input));
      const matches = await glob(input.split(sep).join('/'), { absolute: true, onlyFiles: true, dot: false, caseSensitiveMatch: false });
      const images = matches
        .filter(hasImageExtension)
        .map((m) => resolve(m))
        .sort();
      if (images.length === 0) notes.push(`${input}: no image files matched`);
      for (const m of images) {
        const target = await stat(m).catch(() => undefined);
        if (!target) continue;
        if (await inOut(m)) outSkipped = true;
        else add(m, statId(target));
      }
    } else {
      throw new UsageError(`${input}: no such file or folder\n${example}`, 'check the path, or quote a glob pattern');
    }
  }

  if (outSkipped) notes.push(`the output folder ${outDir} lies inside an input; its files were left out of the search`);
  if (found.size === 0 && walkProblems.length === 0) {
    throw new UsageError(`no image files found in ${inputs.join(', ')} (looked for ${IMAGE_EXTENSIONS.join(' ')})\n${example}`);
  }
  const base = roots.length ? commonBase(roots) : resolve('.');
  const relOf = (path: string): string => (isInside(path, base) && path !== base ? relative(base, path).split(sep).join('/') : path);
  const byRel = <T extends { rel: string }>(x: T, y: T): number => (x.rel < y.rel ? -1 : x.rel > y.rel ? 1 : 0);
  const files = [...found.values()].map((path) => ({ path, rel: relOf(path) })).sort(byRel);
  const problems = walkProblems
    .map((p) => ({ path: p.path, rel: relOf(p.path), code: ErrorCodes.UNREADABLE, ...describeProblem(p) }))
    .sort(byRel);
  return { files, base, notes, problems };
}

/** Joins a '/'-separated relative path onto a folder. */
export function underFolder(folder: string, rel: string): string {
  return join(folder, ...rel.split('/'));
}
