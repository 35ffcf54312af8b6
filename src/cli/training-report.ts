/**
 * What `train` and `tune` share on the command line: their common options, checks, the progress
 * display wired to the fit loop's events, and the closing table of held-out figures.
 */
import type { Argv } from 'yargs';
import { UsageError } from '../errors.js';
import type { Evaluation, FitEvent, FitOptions, FitResult } from '../training/index.js';
import { ExitCode } from './exit-codes.js';
import { formatDuration, Progress } from './progress.js';
import { onStopSignals } from './stop-signals.js';

/** A percentage with one decimal, or a dash where there is none (no clearly coloured pixel, or a run from before the hue figures). */
function percent(value: number | null | undefined): string {
  return value === null || value === undefined || Number.isNaN(value) ? '-' : `${value.toFixed(1)}%`;
}

/** The three hue figures of an evaluation, for live lines. */
function hueFigures(e: Evaluation): string {
  return `right hue ${percent(e.rightHue)}, false colour ${percent(e.falseColour)}, left grey ${percent(e.leftGrey)}`;
}

/** Options both verbs take, as yargs parses them. */
export interface FitArgs {
  photos: string[];
  out?: string;
  hours?: number;
  steps?: number;
  batch: number;
  crop: number;
  seed: number;
  holdout: number;
  resume: boolean;
  'learning-rate'?: number;
  rebalance?: number;
  'eval-every': number;
  'checkpoint-minutes': number;
  workers?: number;
}

/** Adds the shared option table. */
export function fitOptions<T>(yargs: Argv<T>): Argv<T & FitArgs> {
  return yargs
    .positional('photos', { type: 'string', array: true, describe: 'colour photos: files and folders (searched recursively)' })
    .option('out', { type: 'string', describe: 'model folder to write (created if missing)' })
    .option('hours', { type: 'number', describe: 'time budget in hours (all resumed sessions together)' })
    .option('steps', { type: 'number', describe: 'step budget (all resumed sessions together)' })
    .option('batch', { type: 'number', default: 16, describe: 'crops per step' })
    .option('crop', { type: 'number', default: 128, describe: 'crop side in pixels, a multiple of 16' })
    .option('seed', { type: 'number', default: 1, describe: 'seed of every random choice (same seed, same model)' })
    .option('holdout', { type: 'number', default: 0.1, describe: 'fraction of the photos held out for evaluation (at least 2 photos)' })
    .option('resume', { type: 'boolean', default: false, describe: 'continue the run whose checkpoint is in --out' })
    .option('learning-rate', { type: 'number', describe: 'optimiser learning rate (default 1e-3)' })
    .option('rebalance', { type: 'number', describe: 'class rebalancing lambda, 0-1: 0.5 favours vivid colours, higher is more cautious (default 0.5)' })
    .option('eval-every', { type: 'number', default: 100, describe: 'evaluate on the held-out photos every this many steps' })
    .option('checkpoint-minutes', { type: 'number', default: 5, describe: 'minutes between checkpoints' })
    .option('workers', {
      type: 'number',
      describe: 'worker threads computing each step, each on its share of the crops (default: one per core; on --resume the run\'s own; 1 = one thread)',
    }) as unknown as Argv<T & FitArgs>;
}

/** The checks both verbs share; `example` is the verb's example command. Pure: throws UsageError. */
export function checkFitArgs(argv: Partial<FitArgs>, example: string): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${example}`);
  };
  const photos = argv.photos ?? [];
  if (photos.length === 0) fail('name at least one photo folder or file');
  if (!argv.out) fail('--out <model folder> is required');
  if (argv.hours === undefined && argv.steps === undefined) fail('give a budget: --hours, --steps or both');
  if (argv.hours !== undefined && !(argv.hours > 0)) fail(`--hours must be above 0, got ${argv.hours}`);
  if (argv.steps !== undefined && !(Number.isInteger(argv.steps) && argv.steps >= 1)) fail(`--steps must be a whole number of at least 1, got ${argv.steps}`);
  if (argv.batch !== undefined && !(Number.isInteger(argv.batch) && argv.batch >= 1 && argv.batch <= 256)) fail(`--batch must be a whole number from 1 to 256, got ${argv.batch}`);
  if (argv.crop !== undefined && !(Number.isInteger(argv.crop) && argv.crop >= 32 && argv.crop <= 512 && argv.crop % 16 === 0)) {
    fail(`--crop must be a multiple of 16 from 32 to 512, got ${argv.crop}`);
  }
  if (argv.seed !== undefined && !(Number.isInteger(argv.seed) && argv.seed >= 0)) fail(`--seed must be a whole number of 0 or more, got ${argv.seed}`);
  if (argv.holdout !== undefined && !(argv.holdout > 0 && argv.holdout <= 0.5)) fail(`--holdout must be a fraction above 0 and at most 0.5, got ${argv.holdout}`);
  const lr = argv['learning-rate'];
  if (lr !== undefined && !(lr > 0 && lr < 1)) fail(`--learning-rate must be between 0 and 1, got ${lr}`);
  if (argv.rebalance !== undefined && !(argv.rebalance > 0 && argv.rebalance <= 1)) fail(`--rebalance must be above 0 and at most 1, got ${argv.rebalance}`);
  const every = argv['eval-every'];
  if (every !== undefined && !(Number.isInteger(every) && every >= 1)) fail(`--eval-every must be a whole number of at least 1, got ${every}`);
  const minutes = argv['checkpoint-minutes'];
  if (minutes !== undefined && !(minutes > 0)) fail(`--checkpoint-minutes must be above 0, got ${minutes}`);
  if (argv.workers !== undefined && !(Number.isInteger(argv.workers) && argv.workers >= 1)) fail(`--workers must be a whole number of at least 1, got ${argv.workers}`);
  if (argv.workers !== undefined && argv.batch !== undefined && !argv.resume && argv.workers > argv.batch) {
    fail(`--workers ${argv.workers} is more than the ${argv.batch} crops of a step (--batch): each worker needs at least one`);
  }
  return true;
}

/** The fit options the shared arguments stand for. */
export function fitOptionsFrom(argv: FitArgs): FitOptions {
  return {
    photos: argv.photos,
    out: argv.out!,
    hours: argv.hours,
    steps: argv.steps,
    batch: argv.batch,
    crop: argv.crop,
    seed: argv.seed,
    holdout: argv.holdout,
    resume: argv.resume,
    learningRate: argv['learning-rate'],
    rebalance: argv.rebalance,
    evalEvery: argv['eval-every'],
    checkpointMinutes: argv['checkpoint-minutes'],
    workers: argv.workers,
  };
}

/**
 * Runs `run` with a progress display and stop handling (the first Ctrl-C, SIGTERM or SIGHUP stops after the
 * current step and writes a checkpoint; a second one ends the process at once), then prints the held-out
 * table and sets the exit code: 130 when stopped, as for restore.
 */
export async function runWithProgress(
  verb: string,
  run: (signal: AbortSignal, onEvent: (event: FitEvent) => void) => Promise<FitResult>,
): Promise<FitResult> {
  const progress = new Progress();
  const controller = new AbortController();
  const release = onStopSignals((signal) => {
    const how = signal === 'SIGINT' ? 'Ctrl-C' : signal;
    progress.log(`kinhue ${verb}: ${how}: stopping after this step and writing a checkpoint (Ctrl-C again to quit at once)`);
    controller.abort();
    release();
  });
  const onEvent = (event: FitEvent): void => {
    switch (event.type) {
      case 'reading':
        progress.update(event.done / event.total, `reading photos ${event.done}/${event.total}`, event.done === event.total);
        break;
      case 'features':
        progress.update(event.done / event.total, `reading scenes with the backbone ${event.done}/${event.total}`, event.done + 1 === event.total);
        break;
      case 'data':
        progress.log(
          `${event.train + event.holdout} colour photos: ${event.train} to learn from, ${event.holdout} held out` +
            (event.grey ? `; ${event.grey} grey or toned skipped` : '') +
            (event.unreadable.length ? `; ${event.unreadable.length} unreadable skipped` : ''),
        );
        for (const u of event.unreadable) progress.log(`  skipped ${u.file}: ${u.reason}`);
        break;
      case 'resumed':
        progress.log(`resuming at step ${event.step} (${formatDuration(event.seconds)} trained so far)`);
        break;
      case 'workers':
        progress.log(
          event.previous === undefined
            ? `each step computed on ${event.workers === 1 ? 'one thread' : `${event.workers} worker threads`} (--workers)`
            : `continuing with ${event.workers} worker${event.workers === 1 ? '' : 's'} where the run had ${event.previous}: from step ${event.step} on, ` +
                'the gradients are summed in another order, so the weights will no longer match an uninterrupted run bit for bit (recorded in training-summary.json)',
        );
        break;
      case 'baseline':
        progress.log(
          `held-out CIEDE2000: grey ${event.grey.ciede2000.toFixed(2)}, model at start ${event.start.ciede2000.toFixed(2)} (${hueFigures(event.start)})`,
        );
        break;
      case 'step':
        progress.update(
          event.fraction,
          `step ${event.step}  loss ${event.loss.toFixed(3)}` +
            (event.heldOut === undefined ? '' : `  held-out CIEDE2000 ${event.heldOut.toFixed(2)}`) +
            `  ${formatDuration(event.secondsLeft)} left`,
        );
        break;
      case 'evaluation':
        progress.log(
          `step ${event.step}: loss ${event.loss.toFixed(3)}, held-out CIEDE2000 ${event.evaluation.ciede2000.toFixed(2)}, ` +
            `PSNR ${event.evaluation.psnr.toFixed(2)} dB, colourfulness ${event.evaluation.colourfulness.toFixed(1)}, ${hueFigures(event.evaluation)}` +
            `${event.best ? ' (best so far)' : ''}`,
        );
        break;
      case 'note':
        progress.log(`note: ${event.message}`);
        break;
      case 'checkpoint':
      case 'model':
        break;
    }
  };
  try {
    const result = await run(controller.signal, onEvent);
    progress.done();
    console.log(summaryTable(result));
    process.exitCode = result.stoppedBy === 'interrupted' ? ExitCode.INTERRUPTED : ExitCode.OK;
    return result;
  } finally {
    release();
    progress.done();
  }
}

/** The closing lines: held-out figures before and after, beside the grey baseline. */
export function summaryTable(result: FitResult): string {
  const widths = [11, 11, 15, 11, 14, 11];
  const line = (label: string, cells: string[]): string => label.padEnd(26) + cells.map((c, i) => c.padStart(widths[i])).join('');
  const row = (label: string, e: Evaluation): string =>
    line(`  ${label}`, [e.ciede2000.toFixed(2), e.psnr.toFixed(2), e.colourfulness.toFixed(1), percent(e.rightHue), percent(e.falseColour), percent(e.leftGrey)]);
  const { grey, before, after, keptStep } = result.heldOut;
  const stop = result.stoppedBy === 'interrupted' ? 'interrupted; continue with --resume' : `stopped by the ${result.stoppedBy === 'time' ? 'time' : 'step'} budget`;
  return [
    `${result.mode === 'tune' ? 'tuned' : 'trained'} ${result.steps} steps (${result.crops} crops) in ${formatDuration(result.seconds)}, ${stop}`,
    `model written to ${result.out} (weights of step ${keptStep})`,
    line(`held-out photos (${after.photos})`, ['CIEDE2000', 'PSNR (dB)', 'colourfulness', 'right hue', 'false colour', 'left grey']),
    row('grey (L* only)', grey),
    row('model before', before),
    row(`model after (step ${keptStep})`, after),
    ...(after.colouredPhotos !== undefined && after.colouredPhotos < after.photos
      ? [`  (right hue and left grey rest on the ${after.colouredPhotos} held-out photos with clearly coloured pixels)`]
      : []),
  ].join('\n');
}
