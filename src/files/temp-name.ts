/**
 * Temporary and output file names that fit the file system: most allow 255 bytes per name, which
 * a long scan name plus `.confidence.png` or a temporary suffix can pass. Such names are shortened
 * the same way every time (the start of the name, `~`, and eight hex digits of its SHA-256), so a
 * later run finds the same files. Temporary names carry the writing process's id and its machine's
 * name: on a shared file system a process id says nothing about another machine's processes, so
 * only a file of this machine whose process no longer runs is known to be left over.
 */
import { createHash, randomBytes } from 'node:crypto';
import { readdir, rm } from 'node:fs/promises';
import { hostname } from 'node:os';
import { basename, dirname, join } from 'node:path';

/** The longest file name, in bytes, that common file systems (ext4, XFS, Btrfs, APFS) allow. */
export const NAME_MAX_BYTES = 255;

/**
 * `<name>.<pid>@<host>.<8 hex digits>.tmp`, the shape of every temporary name; names written before
 * the machine's name was added, `<name>.<pid>.<8 hex digits>.tmp`, count as this machine's.
 */
const TEMP_PATTERN = /\.(\d+)(?:@([A-Za-z0-9-]+))?\.[0-9a-f]{8}\.tmp$/;

/** Who made a temporary file: a process id and the machine it ran on (undefined in older names). */
export interface TemporaryOwner {
  pid: number;
  host?: string;
}

let hostLabelCache: string | undefined;

/**
 * This machine's name as it goes into file names: the host name up to its first dot, letters,
 * digits and '-' only, at most 63 characters (a DNS label). On a cluster every node (every
 * Kubernetes pod) has its own.
 * @example
 *   hostLabel(); // 'node07'
 */
export function hostLabel(): string {
  hostLabelCache ??=
    hostname()
      .split('.')[0]!
      .replace(/[^A-Za-z0-9-]/g, '-')
      .slice(0, 63) || 'host';
  return hostLabelCache;
}

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
 * The temporary path used while writing `path`: `<name>.<pid>@<host>.<random>.tmp` in the same
 * folder, the name shortened to keep the whole within NAME_MAX_BYTES.
 * @example
 *   tempPathFor('out/photo.png'); // 'out/photo.png.4121@node07.9f3a02c1.tmp'
 */
export function tempPathFor(path: string): string {
  const suffix = `.${process.pid}@${hostLabel()}.${randomBytes(4).toString('hex')}.tmp`;
  return join(dirname(path), `${fitName(basename(path), NAME_MAX_BYTES - Buffer.byteLength(suffix))}${suffix}`);
}

/** Who made a temporary file of this name, or undefined when it is not one. */
export function temporaryOwner(name: string): TemporaryOwner | undefined {
  const match = TEMP_PATTERN.exec(name);
  return match ? ownerNamed(match[1]!, match[2]) : undefined;
}

/** The owner a name gives as its process id's digits and, in names that carry one, its machine. */
export function ownerNamed(pid: string, host: string | undefined): TemporaryOwner {
  return host === undefined ? { pid: Number(pid) } : { pid: Number(pid), host };
}

/**
 * True when `tempName` is a temporary file made while writing one of `names` (file names in its
 * folder): its name before the suffix is one of them, or one of them shortened by fitName.
 * @example
 *   isTemporaryOfAny('a.png.812@node07.5be01c9e.tmp', new Set(['a.png'])); // true
 */
export function isTemporaryOfAny(tempName: string, names: ReadonlySet<string>): boolean {
  const match = TEMP_PATTERN.exec(tempName);
  if (!match) return false;
  const target = tempName.slice(0, match.index);
  if (names.has(target)) return true;
  if (!/~[0-9a-f]{8}$/.test(target)) return false;
  const bytes = Buffer.byteLength(target);
  for (const name of names) if (fitName(name, bytes) === target) return true;
  return false;
}

/** True when a temporary file's owner is a process of this machine that no longer runs. */
export function leftByEndedProcess(owner: TemporaryOwner): boolean {
  return (owner.host === undefined || owner.host === hostLabel()) && !processRuns(owner.pid);
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
 * Removes the temporary files in `folder` whose owner (and name) match `whose`: by default, those of
 * this machine's processes that no longer run (left by a crash, a kill or a power cut); another
 * machine's are never known to be left over, so the default keeps them. Returns the names removed.
 * @example
 *   await removeTemporaryFiles('restored'); // ['a.png.812@node07.5be01c9e.tmp']
 *   await removeTemporaryFiles('restored', (o) => o.pid === process.pid && o.host === hostLabel()); // this process's own
 */
export async function removeTemporaryFiles(
  folder: string,
  whose: (owner: TemporaryOwner, name: string) => boolean = leftByEndedProcess,
): Promise<string[]> {
  const removed: string[] = [];
  const names = await readdir(folder).catch(() => [] as string[]);
  for (const name of names) {
    const owner = temporaryOwner(name);
    if (owner === undefined || !whose(owner, name)) continue;
    await rm(join(folder, name), { force: true }).then(
      () => removed.push(name),
      () => undefined,
    );
  }
  return removed;
}
