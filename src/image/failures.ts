/**
 * Turns what goes wrong while reading an image (file system errors, libvips messages) into
 * InputErrors with fixed codes. Messages name the file and the next step; no stack traces.
 */
import { ErrorCodes, InputError, KinhueError } from '../errors.js';

/** The first line of a libvips message, without its trailing "vips2..." noise. */
function firstLine(message: string): string {
  return message.split('\n')[0]!.trim().replace(/\s+/g, ' ').slice(0, 200);
}

/**
 * An InputError for a file system error on an input (missing, a folder, no permission).
 *
 * @example
 * unreadable('scan.tif', err); // KH_UNREADABLE
 */
export function unreadable(file: string, error: unknown): InputError {
  const code = (error as NodeJS.ErrnoException | undefined)?.code;
  const reason =
    code === 'ENOENT'
      ? 'file not found'
      : code === 'EISDIR'
        ? 'is a folder, not an image file'
        : code === 'EACCES' || code === 'EPERM'
          ? 'permission denied'
          : `cannot be read (${code ?? firstLine(String((error as Error)?.message ?? error))})`;
  return new InputError(ErrorCodes.UNREADABLE, reason, {
    file,
    hint:
      code === 'EACCES' || code === 'EPERM'
        ? 'give your user read permission on the file, then run again'
        : 'check the path and that the drive or share is available, then run again',
    cause: error,
  });
}

/** KH_EMPTY_FILE for a zero-byte input. */
export function emptyFile(file: string): InputError {
  return new InputError(ErrorCodes.EMPTY_FILE, 'the file is empty (0 bytes)', {
    file,
    hint: 'copy the scan again from its source; a 0-byte file usually means an interrupted copy or download',
  });
}

/**
 * Classifies an error thrown by sharp/libvips while reading a header or decoding pixels.
 * Errors kinhue raised itself pass through unchanged.
 */
export function decodeFailure(file: string, error: unknown): KinhueError {
  if (error instanceof KinhueError) return error;
  const message = String((error as Error)?.message ?? error);
  if (/unsupported image format/i.test(message)) {
    return new InputError(ErrorCodes.NOT_AN_IMAGE, 'not an image kinhue can read (JPEG, PNG, TIFF, WebP, GIF, AVIF)', {
      file,
      hint: 'check that this is really an image (its name may say .jpg while it holds something else); convert it to TIFF or PNG, or leave it out',
      cause: error,
    });
  }
  if (/Input file is missing/i.test(message)) return unreadable(file, Object.assign(new Error(message), { code: 'ENOENT' }));
  if (/exceeds pixel limit/i.test(message)) {
    return new InputError(ErrorCodes.TOO_LARGE, 'image is over the pixel limit', {
      file,
      hint: 'if you trust this file, raise the limit with the environment variable KINHUE_MAX_PIXELS',
      cause: error,
    });
  }
  return new InputError(ErrorCodes.CORRUPT_IMAGE, `the image data is damaged or ends early (${firstLine(message)})`, {
    file,
    hint: 'copy or export the file again from its source (an interrupted transfer cuts files short), then run again',
    cause: error,
  });
}
