/**
 * Temporary and output file names that fit the file system: most allow 255 bytes per name, which
 * a long scan name plus `.confidence.png` or a temporary suffix can pass. Such names are shortened
 * the same way every time (the start of the name, `~`, and eight hex digits of its SHA-256), so a
 * later run finds the same files. Temporary names carry the writing process's id, so files left by
 * a process that no longer runs can be told from those of a run in progress.
 */
import { createHash, randomBytes } from 'node:crypto';
import { readdir, rm } from 'node:fs/promises';
import { basename, dirname, join } from 'node:path';

/** The longest file name, in bytes, that common file systems (ext4, XFS, Btrfs, APFS) allow. */
export const NAME_MAX_BYTES = 255;

/** `<name>.<pid>.<8 hex digits>.tmp`, the shape of every temporary name. */
const TEMP_PATTERN = /\.(\d+)\.[0-9a-f]{8}\.tmp$/;

/**
 * `name` cut to fit in `maxBytes` of UTF-8, never inside a character; a name that is cut ends in
 * `~` and eight hex digits of its SHA-256, so two long names that share a start stay apart.
 * @example
 *   fitName('a'.repeat(300), 255).length; // 255: 246 'a', '~', 8 hex digits
 */
export function fitName(name: string, maxBytes: number): string {
  if (Buffer.byteLength(name) <= maxBytes) return name;
  const mark = `~${createHash('sha256').update(name).digest('hex').slice(0, 8)}`;
  let room = maxBytes - mark.length;
  let cut = '';
  for (const char of name) {
    const size = Buffer.byteLength(char);
    if (size > room) break;
    cut += char;
    room -= size;
  }
  return `${cut}${mark}`;
}

/**
 * The temporary path used while writing `path`: `<name>.<pid>.<random>.tmp` in the same folder, the
 * name shortened to keep the whole within NAME_MAX_BYTES.
 * @example
 *   tempPathFor('out/photo.png'); // 'out/photo.png.4121.9f3a02c1.tmp'
 */
export function tempPathFor(path: string): string {
  const suffix = `.${process.pid}.${randomBytes(4).toString('hex')}.tmp`;
  return join(dirname(path), `${fitName(basename(path), NAME_MAX_BYTES - suffix.length)}${suffix}`);
}

/** The id of the process that made a temporary file of this name, or undefined when it is not one. */
export function temporaryOwner(name: string): number | undefined {
  const match = TEMP_PATTERN.exec(name);
  return match ? Number(match[1]) : undefined;
}

/** True while a process with this id runs (on this machine). */
export function processRuns(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (error) {
    // EPERM: it runs, as another user.
    return (error as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/**
 * Removes the temporary files in `folder` whose owner matches `whose`: by default, processes that no
 * longer run (left by a crash, a kill or a power cut). Returns the names removed.
 * @example
 *   await removeTemporaryFiles('restored'); // ['a.png.812.5be01c9e.tmp']
 *   await removeTemporaryFiles('restored', (pid) => pid === process.pid); // this process's own
 */
export async function removeTemporaryFiles(folder: string, whose: (pid: number) => boolean = (pid) => !processRuns(pid)): Promise<string[]> {
  const removed: string[] = [];
  const names = await readdir(folder).catch(() => [] as string[]);
  for (const name of names) {
    const pid = temporaryOwner(name);
    if (pid === undefined || !whose(pid)) continue;
    await rm(join(folder, name), { force: true }).then(() => removed.push(name), () => undefined);
  }
  return removed;
}
