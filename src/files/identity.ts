/**
 * Where a path really leads. Two spellings reach one file through symbolic links (the real path
 * differs), bind mounts and hard links (only the device and inode tell), so both are compared.
 */
import type { Stats } from 'node:fs';
import { realpath, stat } from 'node:fs/promises';
import { basename, dirname, isAbsolute, join, relative, resolve } from 'node:path';

export interface PathIdentity {
  /** The absolute path with every link resolved (for a path that does not exist: its deepest existing folder's, plus the rest). */
  real: string;
  /** `device:inode` when the path exists. */
  id?: string;
  directory: boolean;
}

/** `device:inode` of a stat result. */
export function statId(info: Stats): string {
  return `${info.dev}:${info.ino}`;
}

/**
 * The real path and, when it exists, the device and inode of `path`.
 * @example
 *   const a = await identify('scans-link/a.jpg'); // { real: '/home/me/scans/a.jpg', id: '2049:1311', directory: false }
 */
export async function identify(path: string): Promise<PathIdentity> {
  const abs = resolve(path);
  const info = await stat(abs).catch(() => undefined);
  return { real: await realPathOf(abs), id: info ? statId(info) : undefined, directory: info?.isDirectory() ?? false };
}

/** The path with its links resolved; the part that does not exist yet is kept as written. */
export async function realPathOf(path: string): Promise<string> {
  const abs = resolve(path);
  const tail: string[] = [];
  for (let head = abs; ; head = dirname(head)) {
    try {
      return join(await realpath(head), ...tail.reverse());
    } catch {
      if (dirname(head) === head) return abs;
      tail.push(basename(head));
    }
  }
}

/** True when `child` is `parent` or lies inside it, comparing the paths as written. */
export function isInside(child: string, parent: string): boolean {
  const r = relative(parent, child);
  return r === '' || (!r.startsWith('..') && !isAbsolute(r));
}

/**
 * True when `path` is `folder` or lies inside it, whatever links or bind mounts lead there: every
 * folder above `path`'s real path is compared with `folder` by real path and by device and inode.
 * @example
 *   await isWithin('/mnt/alias/a.jpg', await identify('/home/me/scans')); // true when /mnt/alias is a bind mount of it
 */
export async function isWithin(path: string | PathIdentity, folder: PathIdentity): Promise<boolean> {
  const real = typeof path === 'string' ? await realPathOf(path) : path.real;
  if (isInside(real, folder.real)) return true;
  if (!folder.id) return false;
  for (let dir = real; ; dir = dirname(dir)) {
    const info = await stat(dir).catch(() => undefined);
    if (info && statId(info) === folder.id) return true;
    if (dirname(dir) === dir) return false;
  }
}
