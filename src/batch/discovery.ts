/**
 * Finding the scans to restore: named files, folders searched recursively, and glob patterns, in a
 * deterministic order (sorted by path), with the output folder kept out of the search.
 */
import { stat } from 'node:fs/promises';
import { dirname, extname, isAbsolute, join, relative, resolve, sep } from 'node:path';
import { glob, isDynamicPattern } from 'tinyglobby';
import { UsageError } from '../errors.js';

/** Extensions searched for in folders and globs (case-insensitive). A file named directly is always tried. */
export const IMAGE_EXTENSIONS: readonly string[] = ['.jpg', '.jpeg', '.jpe', '.png', '.tif', '.tiff', '.webp'];

export interface SourceFile {
  /** Absolute path. */
  path: string;
  /** Path relative to the common base of all inputs, with '/' separators: the layout mirrored under --out. */
  rel: string;
}

export interface Discovery {
  files: SourceFile[];
  /** The folder every `rel` is relative to. */
  base: string;
  /** Things worth telling the person (e.g. that the output folder inside an input folder was skipped). */
  notes: string[];
}

/** True when `child` is `parent` or lies inside it. */
export function isInside(child: string, parent: string): boolean {
  const r = relative(parent, child);
  return r === '' || (!r.startsWith('..') && !isAbsolute(r));
}

function hasImageExtension(path: string): boolean {
  return IMAGE_EXTENSIONS.includes(extname(path).toLowerCase());
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

/**
 * Lists the image files named by `inputs`, each with its path relative to the inputs' common base.
 * Throws UsageError when an input does not exist, matches nothing usable, or lies inside `outDir`.
 * @example
 *   const { files } = await discoverInputs(['scans/', 'loose/*.tif'], 'restored');
 */
export async function discoverInputs(inputs: string[], outDir: string): Promise<Discovery> {
  const out = resolve(outDir);
  const roots: string[] = [];
  const found = new Map<string, true>();
  const notes: string[] = [];
  let outSkipped = false;
  const example = 'Example usage: kinhue restore scans/ --out restored/';

  for (const input of inputs) {
    const abs = resolve(input);
    const info = await stat(abs).catch(() => undefined);
    if (info?.isDirectory()) {
      if (isInside(abs, out)) {
        throw new UsageError(`the input folder ${input} is the output folder or inside it\n${example}`, 'choose an --out folder outside your scans');
      }
      roots.push(abs);
      if (isInside(out, abs)) outSkipped = true;
      const matches = await glob('**/*', { cwd: abs, absolute: true, onlyFiles: true, dot: false, followSymbolicLinks: true });
      for (const m of matches) if (hasImageExtension(m)) found.set(resolve(m), true);
    } else if (info) {
      roots.push(dirname(abs));
      found.set(abs, true);
    } else if (isDynamicPattern(input)) {
      roots.push(globBase(input));
      const matches = await glob(input.split(sep).join('/'), { absolute: true, onlyFiles: true, dot: false, caseSensitiveMatch: false });
      const images = matches.filter(hasImageExtension);
      if (images.length === 0) notes.push(`${input}: no image files matched`);
      for (const m of images) found.set(resolve(m), true);
    } else {
      throw new UsageError(`${input}: no such file or folder\n${example}`, 'check the path, or quote a glob pattern');
    }
  }

  const files: string[] = [];
  for (const path of found.keys()) {
    if (isInside(path, out)) outSkipped = true;
    else files.push(path);
  }
  if (outSkipped) notes.push(`the output folder ${outDir} lies inside an input; its files were left out of the search`);
  if (files.length === 0) {
    throw new UsageError(`no image files found in ${inputs.join(', ')} (looked for ${IMAGE_EXTENSIONS.join(' ')})\n${example}`);
  }
  const base = commonBase(roots);
  const listed = files
    .map((path) => ({ path, rel: relative(base, path).split(sep).join('/') }))
    .sort((x, y) => (x.rel < y.rel ? -1 : x.rel > y.rel ? 1 : 0));
  return { files: listed, base, notes };
}

/** Joins a '/'-separated relative path onto a folder. */
export function underFolder(folder: string, rel: string): string {
  return join(folder, ...rel.split('/'));
}
