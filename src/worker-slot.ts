/**
 * One worker thread of a restore run or a training run, started the same way for both: it answers
 * `ready` or `init-failed` once, then one result (or `failed`) per request it was sent. A worker that
 * fails or ends rejects its start and its request in flight, and keeps the reason for later requests.
 */
import { Worker } from 'node:worker_threads';
import { reviveError, type SerialisedError } from './errors.js';

export interface WorkerSlot<R> {
  worker: Worker;
  /** Settles once the worker has started (or could not). */
  ready: Promise<void>;
  pending?: { id: number; resolve: (result: R) => void; reject: (error: Error) => void };
  /** Set once the worker has failed or ended: the reason, for any later request. */
  failure?: Error;
}

/** What every kinhue worker sends: `ready`, `init-failed` (with `error`), then per request its result type or `failed` (with `error`). */
interface WorkerMessage {
  type: string;
  id?: number;
  error?: SerialisedError;
}

export interface WorkerStart<M extends { type: string }, R> {
  /** The message type of a result, and the result it carries. */
  resultType: string;
  resultOf: (message: M) => R;
  /** Called with the `ready` message (a backend name, a warning). */
  onReady?: (message: M) => void;
  /** The reason given when the worker fails or ends, by the error or exit code. */
  errorText: (error: Error) => string;
  exitText: (code: number) => string;
}

/**
 * Starts a worker thread on `script` with `workerData`.
 * @example
 *   const slot = startWorker(WORKER_SCRIPT, init, { resultType: 'done', resultOf: (m) => m.outcome, errorText, exitText });
 */
export function startWorker<M extends { type: string }, R>(script: URL, workerData: unknown, start: WorkerStart<M, R>): WorkerSlot<R> {
  const worker = new Worker(script, { workerData });
  const slot: WorkerSlot<R> = { worker, ready: Promise.resolve() };
  slot.ready = new Promise<void>((resolve, reject) => {
    const fail = (error: Error): void => {
      if (slot.failure) return;
      slot.failure = error;
      reject(error);
      slot.pending?.reject(error);
    };
    worker.on('message', (message: M) => {
      const m = message as WorkerMessage;
      const pending = slot.pending?.id === m.id ? slot.pending : undefined;
      if (m.type === 'ready') {
        start.onReady?.(message);
        resolve();
      } else if (m.type === 'init-failed') {
        fail(reviveError(m.error!));
        void worker.terminate();
      } else if (m.type === 'failed') {
        pending?.reject(reviveError(m.error!));
      } else if (m.type === start.resultType) {
        pending?.resolve(start.resultOf(message));
      }
    });
    worker.on('error', (error) => fail(new Error(start.errorText(error))));
    worker.on('exit', (code) => fail(new Error(start.exitText(code))));
  });
  // A failed start is reported by the next request; keep Node from calling it unhandled meanwhile.
  slot.ready.catch(() => undefined);
  return slot;
}
