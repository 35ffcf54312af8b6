/**
 * The messages between the run and its worker threads (plain data only).
 */
import type { SerialisedError } from '../errors.js';
import type { FileJob, FileOutcome } from './stages/pipeline.js';

// How errors cross a thread boundary is shared with training's workers (errors.ts).
export { reviveError, serialiseError, type SerialisedError } from '../errors.js';

export interface WorkerInit {
  modelDir: string;
  /** Threads each ONNX Runtime operation may use in this worker: its share of the cores. */
  onnxThreads: number;
}

export type ToWorker = { type: 'job'; id: number; job: FileJob };

export type FromWorker =
  | { type: 'ready'; backend: string; warning?: string }
  | { type: 'init-failed'; error: SerialisedError }
  | { type: 'done'; id: number; outcome: FileOutcome }
  | { type: 'failed'; id: number; error: SerialisedError };
