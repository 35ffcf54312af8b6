/**
 * Worker threads for a restore run: up to `size` of them, each with its own model, started on first
 * need. The caller keeps at most `size` jobs in flight (p-limit), so a job always finds a free worker.
 * A worker that dies takes only its current file with it; the next job starts a fresh one.
 */
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import type { FileJob, FileOutcome } from './stages/pipeline.js';
import { startWorker, type WorkerSlot } from '../worker-slot.js';
import type { FromWorker, WorkerInit } from './worker-protocol.js';

/** The built worker script. src/batch and dist/batch are both two levels below the package root. */
export const WORKER_SCRIPT = new URL('../../dist/batch/worker.js', import.meta.url);

type Slot = WorkerSlot<FileOutcome>;

export class WorkerPool {
  private readonly slots: Slot[] = [];
  private readonly idle: Slot[] = [];
  private nextId = 1;
  private closed = false;
  /** The backend the workers run, once one has started. */
  backend?: string;
  /** A warning from the backend choice (e.g. the slow fallback), once one has started. */
  backendWarning?: string;

  constructor(
    private readonly size: number,
    private readonly init: WorkerInit,
  ) {
    if (!existsSync(fileURLToPath(WORKER_SCRIPT))) {
      throw new Error(`kinhue is not built (${fileURLToPath(WORKER_SCRIPT)} is missing): run npm run build`);
    }
  }

  /** Restores one file on a free worker. Rejects with the file's error, or with the model's if no worker can start. */
  async run(job: FileJob): Promise<FileOutcome> {
    if (this.closed) throw new Error('the worker pool is closed');
    const slot = this.idle.pop() ?? this.spawn();
    await slot.ready;
    const id = this.nextId++;
    try {
      return await new Promise<FileOutcome>((resolve, reject) => {
        slot.pending = { id, resolve, reject };
        slot.worker.postMessage({ type: 'job', id, job });
      });
    } finally {
      slot.pending = undefined;
      if (!slot.failure && !this.closed) this.idle.push(slot);
    }
  }

  /** Ends every worker at once; jobs in flight reject. */
  async terminate(): Promise<void> {
    this.closed = true;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
  }

  /** Ends idle workers after the run. */
  async close(): Promise<void> {
    await this.terminate();
  }

  private spawn(): Slot {
    if (this.slots.filter((s) => !s.failure).length >= this.size) throw new Error('more jobs in flight than workers');
    const slot = startWorker<FromWorker, FileOutcome>(WORKER_SCRIPT, this.init, {
      resultType: 'done',
      resultOf: (m) => (m as Extract<FromWorker, { type: 'done' }>).outcome,
      onReady: (m) => {
        const ready = m as Extract<FromWorker, { type: 'ready' }>;
        this.backend = ready.backend;
        this.backendWarning = ready.warning;
      },
      errorText: (error) => `a restore worker failed: ${error.message}`,
      exitText: (code) => `a restore worker stopped (exit code ${code})`,
    });
    this.slots.push(slot);
    return slot;
  }
}
