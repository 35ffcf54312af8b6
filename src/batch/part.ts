/**
 * Parts of a run: one restore split over many machines (a Slurm array, a Kubernetes indexed Job),
 * each taking its own part of the scans into one shared output folder, without locks. A scan's part
 * follows from a hash of its output name, never from its place in a list, so adding scans moves no
 * other scan to another part, and two parts can never write the same output file: scans whose
 * outputs could share a name always fall in the same part, even when the parts found different sets
 * of scans (some added between their starts).
 */
import { createHash } from 'node:crypto';
import { extname } from 'node:path';
import { UsageError } from '../errors.js';

/** Part `index` of `count`, counted from 1. */
export interface Part {
  index: number;
  count: number;
}

/** Schedulers whose environment names a task's part. */
export const SCHEDULERS = ['slurm', 'kubernetes'] as const;
export type Scheduler = (typeof SCHEDULERS)[number];

/** More parts than this is a typo: 100,000 scans on 10,000 machines is 10 each. */
export const MAX_PARTS = 10000;

/**
 * The key a scan's part is drawn from: its output image's name (relative to the output folder) in
 * lower case, without its extension and without `.confidence` at its end. A scan's three outputs
 * (`<stem><ext>`, `<stem>.confidence.png`, `<stem>.kinhue.json`) share one stem, and a scan named
 * `<stem>.confidence.png` (its image would be another's confidence map) has the same key, so every
 * pair of scans that could write one file (also on a file system that ignores letter case) shares
 * a key, and with it a part.
 * @example
 *   partKey('Sub/Barn_JPG.jpg'); // 'sub/barn_jpg'
 */
export function partKey(outputImage: string): string {
  let key = outputImage.slice(0, outputImage.length - extname(outputImage).length).toLowerCase();
  while (key.endsWith('.confidence')) key = key.slice(0, -'.confidence'.length);
  return key;
}

/**
 * The part (counted from 1) of `count` that writes the output `outputImage`: the first 48 bits of the
 * SHA-256 of its key, modulo `count`.
 * @example
 *   partOf('barn.jpg', 3); // 1, 2 or 3, the same on every machine and every run
 */
export function partOf(outputImage: string, count: number): number {
  const hash = createHash('sha256').update(partKey(outputImage)).digest('hex');
  return (Number.parseInt(hash.slice(0, 12), 16) % count) + 1;
}

/**
 * Reads `K/N` (part K of N, K from 1 to N). Throws UsageError naming what is wrong.
 * @example
 *   parsePart('2/3'); // { index: 2, count: 3 }
 */
export function parsePart(text: string): Part {
  const match = /^\s*(\d+)\s*\/\s*(\d+)\s*$/.exec(text);
  if (!match) throw new UsageError(`--part must be K/N, part K of N (e.g. 2/3), got ${text}`);
  return checkedPart(Number(match[1]), Number(match[2]), `--part ${text}`);
}

/**
 * `{ index, count }` when both are whole numbers with 1 <= index <= count <= MAX_PARTS; else throws
 * UsageError, `what` naming where the numbers came from.
 * @example
 *   checkedPart(4, 3, '--part 4/3'); // throws: the part must be a whole number from 1 to 3, got 4
 */
export function checkedPart(index: number, count: number, what: string, hint?: string): Part {
  if (!(Number.isInteger(count) && count >= 1 && count <= MAX_PARTS)) {
    throw new UsageError(`${what}: the number of parts must be a whole number from 1 to ${MAX_PARTS}, got ${count}`, hint);
  }
  if (!(Number.isInteger(index) && index >= 1 && index <= count)) {
    throw new UsageError(`${what}: the part must be a whole number from 1 to ${count}, got ${index}`, hint);
  }
  return { index, count };
}

/**
 * This task's part, from its scheduler's environment. Slurm: the array task id is the part (number the
 * array from 1, `#SBATCH --array=1-N`) and the array's task count the number of parts, unless `count`
 * is given (a task resubmitted alone, `sbatch --array=K`, is an array of one). Kubernetes: an Indexed
 * Job's completion index plus 1 is the part; the number of parts, the Job's `completions`, must be
 * given as `count`, since Kubernetes does not put it in the environment.
 * @example
 *   partFromScheduler('slurm', { SLURM_ARRAY_TASK_ID: '2', SLURM_ARRAY_TASK_COUNT: '3' }); // { index: 2, count: 3 }
 *   partFromScheduler('kubernetes', { JOB_COMPLETION_INDEX: '0' }, 10); // { index: 1, count: 10 }
 */
export function partFromScheduler(scheduler: Scheduler, env: NodeJS.ProcessEnv, count?: number): Part {
  const whole = (name: string): number | undefined => {
    const value = env[name];
    if (value === undefined || value === '') return undefined;
    if (!/^\d+$/.test(value.trim())) throw new UsageError(`--part-from ${scheduler}: ${name} is ${value}, not a whole number`);
    return Number(value);
  };
  if (scheduler === 'slurm') {
    const id = whole('SLURM_ARRAY_TASK_ID');
    if (id === undefined) {
      throw new UsageError(
        '--part-from slurm: SLURM_ARRAY_TASK_ID is not set, so this is not a task of a Slurm job array',
        'submit the script as an array, sbatch --array=1-N, or give the part with --part K/N',
      );
    }
    const tasks = count ?? whole('SLURM_ARRAY_TASK_COUNT');
    if (tasks === undefined)
      throw new UsageError('--part-from slurm: SLURM_ARRAY_TASK_COUNT is not set', 'give the number of parts with --part-count N');
    if (id === 0) {
      throw new UsageError(
        '--part-from slurm: array task 0: parts are counted from 1',
        'number the array from 1 (#SBATCH --array=1-N), so that task K restores part K',
      );
    }
    return checkedPart(
      id,
      tasks,
      `--part-from slurm (task ${id} of ${tasks})`,
      count === undefined && id > tasks
        ? 'a task resubmitted alone (sbatch --array=K) is an array of one: give the number of parts with --part-count N'
        : undefined,
    );
  }
  const index = whole('JOB_COMPLETION_INDEX');
  if (index === undefined) {
    throw new UsageError(
      '--part-from kubernetes: JOB_COMPLETION_INDEX is not set, so this is not a pod of an Indexed Job',
      'run it from a Job with completionMode: Indexed, or give the part with --part K/N',
    );
  }
  if (count === undefined) {
    throw new UsageError('--part-from kubernetes needs the number of parts', "add --part-count N, N being the Job's completions");
  }
  return checkedPart(index + 1, count, `--part-from kubernetes (completion index ${index}, ${count} parts)`);
}

/**
 * A part as people read it.
 * @example
 *   partLabel({ index: 2, count: 3 }); // 'part 2 of 3'
 */
export function partLabel(part: Part): string {
  return `part ${part.index} of ${part.count}`;
}
