/** SHA-256 of a file's bytes, read as a stream so large scans are not held twice. */
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import { ErrorCodes, InputError } from '../errors.js';

/**
 * Hex SHA-256 of a file. Throws InputError KH_UNREADABLE when it cannot be read.
 * @example
 *   await fileSha256('scans/a.tif'); // 'e3b0c442...'
 */
export async function fileSha256(path: string): Promise<string> {
  const hash = createHash('sha256');
  try {
    for await (const chunk of createReadStream(path, { highWaterMark: 1 << 20 })) hash.update(chunk as Buffer);
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    throw new InputError(
      ErrorCodes.UNREADABLE,
      code === 'EACCES' || code === 'EPERM' ? 'permission denied' : `cannot be read (${code ?? String(error)})`,
      {
        file: path,
        hint:
          code === 'EACCES' || code === 'EPERM'
            ? 'give your user read permission on the file, then run again'
            : 'check the path and that the drive or share is available, then run again',
        cause: error,
      },
    );
  }
  return hash.digest('hex');
}
