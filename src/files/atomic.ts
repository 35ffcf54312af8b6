/**
 * Atomic writes: output goes to a temporary file in the destination folder, then a rename puts
 * it in place, so a crash or a failed encoder never leaves a half-written file under the real name.
 * The temporary name (`files/temp-name.ts`) is created exclusively first, so it can never be an
 * existing file; rename within one folder is atomic on POSIX file systems and replaces an existing
 * file on Windows as well.
 */
import { open, rename, rm, writeFile } from 'node:fs/promises';
import { ErrorCodes, KinhueError } from '../errors.js';
import { tempPathFor } from './temp-name.js';

/**
 * Runs `write(tempPath)`, then renames the temporary file to `path`. On any failure the temporary
 * file is removed and the error is rethrown (KinhueErrors as they are, others as KH_WRITE_FAILED).
 *
 * @example
 * await writeAtomic('out/photo.png', (tmp) => sharp(input).png().toFile(tmp));
 */
export async function writeAtomic<T>(path: string, write: (tempPath: string) => Promise<T>): Promise<T> {
  const temp = tempPathFor(path);
  let made = false;
  try {
    await (await open(temp, 'wx')).close();
    made = true;
    const result = await write(temp);
    await rename(temp, path);
    return result;
  } catch (error) {
    if (made) await rm(temp, { force: true }).catch(() => undefined);
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
  await writeAtomic(path, (temp) => writeFile(temp, data));
}

/** KH_WRITE_FAILED naming the output and the likely fix; KinhueErrors pass through. */
export function writeFailure(path: string, error: unknown): KinhueError {
  if (error instanceof KinhueError) return error;
  const code = (error as NodeJS.ErrnoException | undefined)?.code;
  const reason =
    code === 'ENOENT'
      ? 'the output folder does not exist'
      : code === 'ENOSPC'
        ? 'the disk is full'
        : code === 'ENAMETOOLONG'
          ? 'the file name is too long for the file system'
          : code === 'EACCES' || code === 'EPERM' || code === 'EROFS'
            ? 'no permission to write there'
            : code === 'EISDIR'
              ? 'a folder of that name is in the way'
              : `could not be written (${String((error as Error)?.message ?? error).split('\n')[0]})`;
  return new KinhueError(ErrorCodes.WRITE_FAILED, reason, {
    file: path,
    hint:
      code === 'ENAMETOOLONG'
        ? "shorten the scan's name or its folders' names, then run again"
        : code === 'EISDIR'
          ? 'move the folder out of the way or choose another output folder, then run again'
          : 'check that the output folder exists, is writable and has free space, then run again',
    cause: error,
  });
}
