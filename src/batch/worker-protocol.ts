/**
 * The messages between the run and its worker threads (plain data only), and how errors cross the
 * thread boundary: KinhueErrors keep their code, file and next step; anything else is marked internal.
 */
import { isKinhueError, KinhueError, ModelError, type ErrorCode } from '../errors.js';
import type { FileJob, FileOutcome } from './restore-file.js';

export interface WorkerInit {
  modelDir: string;
}

export interface SerialisedError {
  /** A KH_* code, or 'internal' for an unexpected failure. */
  code: string;
  message: string;
  file?: string;
  hint?: string;
  stack?: string;
}

export type ToWorker = { type: 'job'; id: number; job: FileJob };

export type FromWorker =
  | { type: 'ready'; backend: string; warning?: string }
  | { type: 'init-failed'; error: SerialisedError }
  | { type: 'done'; id: number; outcome: FileOutcome }
  | { type: 'failed'; id: number; error: SerialisedError };

/** Turns any thrown value into plain data. */
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
