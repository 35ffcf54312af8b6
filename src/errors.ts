/**
 * The few error classes kinhue raises. Each has a fixed `code`, names the file it is about
 * (when there is one) and carries the next step for the person running the tool.
 * The CLI maps them to exit codes; core modules only throw them.
 */

/** Fixed error codes. Documented in the README; never renumber or rename one. */
export const ErrorCodes = {
  /** The command line is wrong (unknown option, missing input, bad value). */
  USAGE: 'KH_USAGE',
  /** A file or folder could not be found or read. */
  UNREADABLE: 'KH_UNREADABLE',
  /** A zero-byte file. */
  EMPTY_FILE: 'KH_EMPTY_FILE',
  /** The file is not an image kinhue can decode (wrong format, text named .jpg, ...). */
  NOT_AN_IMAGE: 'KH_NOT_AN_IMAGE',
  /** The image data ends early or is corrupt. */
  CORRUPT_IMAGE: 'KH_CORRUPT_IMAGE',
  /** The image is larger than the pixel limit (decompression-bomb guard). */
  TOO_LARGE: 'KH_TOO_LARGE',
  /** A model folder is missing, not a kinhue model, or its weights or layout (model.json) fail their hash. */
  BAD_MODEL: 'KH_BAD_MODEL',
  /** Training data is unusable: empty, unreadable, too few colour photos. */
  BAD_DATA: 'KH_BAD_DATA',
  /** A hints or reference file is malformed. */
  BAD_HINTS: 'KH_BAD_HINTS',
  /** An output could not be written. */
  WRITE_FAILED: 'KH_WRITE_FAILED',
  /** An output would replace an input (the same file through a link, a bind mount or another spelling). */
  OUTPUT_ON_INPUT: 'KH_OUTPUT_ON_INPUT',
  /** An output folder holds another scan's result under the name this scan's result would take. */
  OUTPUT_CONFLICT: 'KH_OUTPUT_CONFLICT',
} as const;

export type ErrorCode = (typeof ErrorCodes)[keyof typeof ErrorCodes];

export interface KinhueErrorOptions {
  /** The file or folder the error is about. */
  file?: string;
  /** What the person should do next, one sentence. */
  hint?: string;
  cause?: unknown;
}

/** Base class: a problem with the input or the environment that the user can fix. */
export class KinhueError extends Error {
  readonly code: ErrorCode;
  readonly file?: string;
  readonly hint?: string;

  constructor(code: ErrorCode, message: string, options: KinhueErrorOptions = {}) {
    super(message, options.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'KinhueError';
    this.code = code;
    this.file = options.file;
    this.hint = options.hint;
  }

  /** One or two lines for people: "<file>: <message>\n  next step: <hint>". */
  describe(): string {
    const head = this.file ? `${this.file}: ${this.message}` : this.message;
    return this.hint ? `${head}\n  next step: ${this.hint}` : head;
  }
}

/** The command line itself is wrong. Exit code 2. */
export class UsageError extends KinhueError {
  /**
   * False when the command line is well formed but asks for something the folders on disk refuse
   * (an output folder already in use): the command's help would not help, so only the reason is printed.
   */
  readonly aboutCommandLine: boolean;
  constructor(message: string, hint?: string, options: { aboutCommandLine?: boolean } = {}) {
    super(ErrorCodes.USAGE, message, { hint });
    this.name = 'UsageError';
    this.aboutCommandLine = options.aboutCommandLine ?? true;
  }
}

/** An input image cannot be used. Recorded per file; a batch goes on. */
export class InputError extends KinhueError {
  constructor(code: ErrorCode, message: string, options: KinhueErrorOptions = {}) {
    super(code, message, options);
    this.name = 'InputError';
  }
}

/** A model folder cannot be used. */
export class ModelError extends KinhueError {
  constructor(message: string, options: KinhueErrorOptions = {}) {
    super(ErrorCodes.BAD_MODEL, message, options);
    this.name = 'ModelError';
  }
}

/** True for errors kinhue raised on purpose (as opposed to bugs). */
export function isKinhueError(error: unknown): error is KinhueError {
  return error instanceof KinhueError;
}

/** An error as plain data, to cross a thread boundary. */
export interface SerialisedError {
  /** A KH_* code, or 'internal' for an unexpected failure. */
  code: string;
  message: string;
  file?: string;
  hint?: string;
  stack?: string;
}

/** Turns any thrown value into plain data: KinhueErrors keep their code, file and next step; anything else is marked internal. */
export function serialiseError(error: unknown): SerialisedError {
  if (isKinhueError(error)) return { code: error.code, message: error.message, file: error.file, hint: error.hint };
  const e = error instanceof Error ? error : new Error(String(error));
  return { code: 'internal', message: e.message, stack: e.stack };
}

/** Rebuilds a KinhueError (or a plain Error for internal failures) from plain data. */
export function reviveError(data: SerialisedError): Error {
  if (data.code === 'KH_BAD_MODEL') return new ModelError(data.message, { file: data.file, hint: data.hint });
  if (data.code !== 'internal') return new KinhueError(data.code as ErrorCode, data.message, { file: data.file, hint: data.hint });
  const error = new Error(data.message);
  if (data.stack) error.stack = data.stack;
  return error;
}
