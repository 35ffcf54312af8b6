/**
 * Atomic writes: output goes to a temporary file in the destination folder, then a rename puts
 * it in place, so a crash or a failed encoder never leaves a half-written file under the real name.
 * The temporary name is `<name>.<pid>.<random>.tmp`; rename within one folder is atomic on POSIX
 * file systems and replaces an existing file on Windows as well.
 */
import { randomBytes } from 'node:crypto';
import { rename, rm, writeFile } from 'node:fs/promises';
import { basename, dirname, join } from 'node:path';
import { ErrorCodes, KinhueError } from '../errors.js';

/** The temporary path used while writing `path`. */
export function tempPathFor(path: string): string {
  return join(dirname(path), `${basename(path)}.${process.pid}.${randomBytes(4).toString('hex')}.tmp`);
}

/**
 * Runs `write(tempPath)`, then renames the temporary file to `path`. On any failure the temporary
 * file is removed and the error is rethrown (KinhueErrors as they are, others as KH_WRITE_FAILED).
 *
 * @example
 * await writeAtomic('out/photo.png', (tmp) => sharp(input).png().toFile(tmp));
 */
export async function writeAtomic<T>(path: string, write: (tempPath: string) => Promise<T>): Promise<T> {
  const temp = tempPathFor(path);
  try {
    const result = await write(temp);
    await rename(temp, path);
    return result;
  } catch (error) {
    await rm(temp, { force: true }).catch(() => undefined);
    throw writeFailure(path, error);
  }
}

/**
 * Writes a whole file atomically.
 *
 * @example
 * await writeFileAtomic('out/manifest.json', JSON.stringify(manifest));
 */
export async function writeFileAtomic(path: string, data: Buffer | Uint8Array | string): Promise<void> {
  await writeAtomic(path, (temp) => writeFile(temp, data, { flag: 'wx' }));
}

/** KH_WRITE_FAILED naming the output and the likely fix; KinhueErrors pass through. */
export function writeFailure(path: string, error: unknown): KinhueError {
  if (error instanceof KinhueError) return error;
  const code = (error as NodeJS.ErrnoException | undefined)?.code;
  const reason =
    code === 'ENOENT' ? 'the output folder does not exist'
    : code === 'ENOSPC' ? 'the disk is full'
    : code === 'EACCES' || code === 'EPERM' || code === 'EROFS' ? 'no permission to write there'
    : `could not be written (${String((error as Error)?.message ?? error).split('\n')[0]})`;
  return new KinhueError(ErrorCodes.WRITE_FAILED, reason, {
    file: path,
    hint: 'check that the output folder exists, is writable and has free space, then run again',
    cause: error,
  });
}
