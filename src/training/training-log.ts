/**
 * The evaluation log of a run: one JSON object per line (JSONL) in the output folder, one line per
 * validation evaluation, so a run can be followed or plotted while it trains.
 */
import { appendFile, readFile } from 'node:fs/promises';
import { join } from 'node:path';
import { writeFileAtomic } from '../files/index.js';

/** The file name of the evaluation log inside a run's output folder. */
export const TRAINING_LOG_FILE = 'training-log.jsonl';

/** One line of the log. */
export interface TrainingLogEntry {
  step: number;
  /** Seconds of training so far (over all resumed sessions). */
  seconds: number;
  /** Mean training loss since the previous entry (null when no step was taken since). */
  loss: number | null;
  ciede2000: number;
  psnr: number;
  colourfulness: number;
  /** Hue figures in percent (Evaluation); absent in logs written before they existed, null where no held-out photo has clearly coloured pixels. */
  rightHue?: number | null;
  falseColour?: number;
  leftGrey?: number | null;
  /** Photos the figures rest on: the validation photos (absent in logs from before the split, which evaluated the held-out ones). */
  photos?: number;
  /** True when this evaluation is the best so far. */
  best: boolean;
  time: string;
}

/**
 * Appends one entry.
 * @example
 *   await appendTrainingLog('run/', { step: 100, seconds: 80, loss: 2.4, ciede2000: 9.1, psnr: 24, colourfulness: 21, rightHue: 31, falseColour: 6, leftGrey: 40, best: true, time: new Date().toISOString() });
 */
export async function appendTrainingLog(dir: string, entry: TrainingLogEntry): Promise<void> {
  await appendFile(join(dir, TRAINING_LOG_FILE), `${JSON.stringify(entry)}\n`, 'utf8');
}

/**
 * Reads the log (missing file: empty list; a torn last line is dropped).
 * @example
 *   const entries = await readTrainingLog('run/');
 */
export async function readTrainingLog(dir: string): Promise<TrainingLogEntry[]> {
  let text: string;
  try {
    text = await readFile(join(dir, TRAINING_LOG_FILE), 'utf8');
  } catch {
    return [];
  }
  const entries: TrainingLogEntry[] = [];
  for (const line of text.split('\n')) {
    if (!line.trim()) continue;
    try {
      entries.push(JSON.parse(line) as TrainingLogEntry);
    } catch {
      // A line cut short by a crash.
    }
  }
  return entries;
}

/**
 * Keeps only entries up to `step` (a resumed run repeats the steps after its checkpoint) or,
 * with step 0, starts an empty log.
 * @example
 *   await truncateTrainingLog('run/', 400);
 */
export async function truncateTrainingLog(dir: string, step: number): Promise<void> {
  const kept = step > 0 ? (await readTrainingLog(dir)).filter((e) => e.step <= step) : [];
  await writeFileAtomic(join(dir, TRAINING_LOG_FILE), Buffer.from(kept.map((e) => `${JSON.stringify(e)}\n`).join(''), 'utf8'));
}
