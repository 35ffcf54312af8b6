/**
 * What `train` and `tune` share on the command line: their common options, checks, the progress
 * display wired to the fit loop's events, and the closing table of held-out figures.
 */
import type { Argv } from 'yargs';
import { UsageError } from '../errors.js';
import {
  choosesStep,
  fit,
  FIT_OPTIONS,
  fitDefault,
  RIGHT_HUE_PER_CIEDE2000,
  type BestSoFar,
  type Evaluation,
  type FitEvent,
  type FitMode,
  type FitOptions,
  type FitResult,
} from '../training/index.js';
import { ExitCode } from './exit-codes.js';
import { flagName } from './option-table.js';
import { writeModelCard } from './model-card.js';
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

/** The command line of train or tune as yargs parses it: each option under its flag and its camelCase name. */
export type FitArgs = { photos: string[] } & Record<string, unknown>;

/** Adds a verb's option table, as {@link FIT_OPTIONS} lists it; the defaults are fit's, shown, not set here. */
export function fitOptions<T>(yargs: Argv<T>, mode: FitMode): Argv<T & FitArgs> {
  let table = yargs.positional('photos', {
    type: 'string',
    array: true,
    describe: 'colour photos: files and folders (searched recursively)',
  });
  for (const spec of FIT_OPTIONS) {
    if (!spec.verbs.includes(mode)) continue;
    const shown = spec.defaults?.[mode];
    table = table.option(flagName(spec.key), {
      type: spec.type,
      describe: spec.describe,
      ...(shown === undefined ? {} : { defaultDescription: String(shown) }),
    });
  }
  return table as unknown as Argv<T & FitArgs>;
}

/** The checks of a verb's command line, from {@link FIT_OPTIONS}; `example` is the verb's example command. Pure: throws UsageError. */
export function checkFitArgs(argv: Partial<FitArgs>, mode: FitMode, example: string): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${example}`);
  };
  const photos = argv.photos ?? [];
  if (photos.length === 0) fail('name at least one photo folder or file');
  if (!argv.out) fail('--out <model folder> is required');
  if (argv.hours === undefined && argv.steps === undefined) fail('give a budget: --hours, --steps or both');
  for (const spec of FIT_OPTIONS) {
    const flag = flagName(spec.key);
    const value = argv[flag];
    if (value === undefined || !spec.verbs.includes(mode)) continue;
    if (spec.type === 'string' && String(value).trim() === '') fail(`--${flag} needs a value`);
    if (spec.valid && !(typeof value === 'number' && spec.valid(value))) fail(`--${flag} must be ${spec.rule}, got ${String(value)}`);
  }
  const workers = argv.workers as number | undefined;
  const batch = (argv.batch as number | undefined) ?? fitDefault<number>('batch', mode)!;
  if (workers !== undefined && !argv.resume && workers > batch) {
    fail(`--workers ${workers} is more than the ${batch} crops of a step (--batch): each worker needs at least one`);
  }
  return true;
}

/** The fit options a verb's arguments stand for. */
export function fitOptionsFrom(argv: FitArgs, mode: FitMode): FitOptions {
  const options: FitOptions = { photos: argv.photos, out: String(argv.out), mode };
  for (const spec of FIT_OPTIONS) {
    const value = argv[flagName(spec.key)];
    if (spec.verbs.includes(mode) && value !== undefined) (options as unknown as Record<string, unknown>)[spec.key] = value;
  }
  return options;
}

/** "9.80, right hue 61.2%": the validation figures that choose a step. */
function choiceFigures(figure: Pick<BestSoFar, 'ciede2000' | 'rightHue'>): string {
  return `${figure.ciede2000.toFixed(2)}${figure.rightHue === null ? '' : `, right hue ${figure.rightHue.toFixed(1)}%`}`;
}

/** "9.80, right hue 61.2% at step 200": a best or last figure for live lines. */
function atStep(figure: BestSoFar): string {
  return `${choiceFigures(figure)} at step ${figure.step}`;
}

/**
 * Runs fit with a progress display and stop handling (the first Ctrl-C, SIGTERM or SIGHUP stops after the
 * current step and writes a checkpoint; a second one ends the process at once), prints the closing table,
 * writes the model card (measured on the held-out photos, with the verdict) and sets the exit code: 130
 * when stopped, as for restore.
 */
export async function runWithProgress(options: Omit<FitOptions, 'signal'>): Promise<FitResult> {
  const verb = options.mode ?? 'train';
  const progress = new Progress();
  const controller = new AbortController();
  const release = onStopSignals((signal) => {
    const how = signal === 'SIGINT' ? 'Ctrl-C' : signal;
    progress.log(`kinhue ${verb}: ${how}: stopping after this step and writing a checkpoint (Ctrl-C again to quit at once)`);
    controller.abort();
    release();
  });
  /** The photos evaluated along the way: the held-out ones in a run without validation photos. */
  let evaluated = 'validation';
  const onEvent = (event: FitEvent): void => {
    switch (event.type) {
      case 'reading':
        progress.update(event.done / event.total, `reading photos ${event.done}/${event.total}`, event.done === event.total);
        break;
      case 'features':
        progress.update(
          event.done / event.total,
          `reading scenes with the backbone ${event.done}/${event.total}`,
          event.done + 1 === event.total,
        );
        break;
      case 'data':
        progress.log(
          `${event.train + event.validation + event.holdout} colour photos: ${event.train} to learn from` +
            (event.validation ? `, ${event.validation} to choose the steps kept (validation)` : '') +
            `, ${event.holdout} held out to report on` +
            (event.grey ? `; ${event.grey} grey or toned skipped` : '') +
            (event.unreadable.length ? `; ${event.unreadable.length} unreadable skipped` : ''),
        );
        for (const u of event.unreadable) progress.log(`  skipped ${u.file}: ${u.reason}`);
        evaluated = event.validation ? 'validation' : 'held-out';
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
          `at start, on the ${event.validation.start.photos} ${evaluated} photos: CIEDE2000 grey ${event.validation.grey.ciede2000.toFixed(2)}, ` +
            `model ${event.validation.start.ciede2000.toFixed(2)} (${hueFigures(event.validation.start)})`,
        );
        break;
      case 'step':
        progress.update(
          event.fraction,
          `step ${event.step}  loss ${event.loss.toFixed(3)}` +
            (event.last ? `  ${evaluated} CIEDE2000 ${atStep(event.last)}` : '') +
            (event.best ? `  best ${atStep(event.best)}` : '') +
            `  ${formatDuration(event.secondsLeft)} left`,
        );
        break;
      case 'evaluation':
        progress.log(
          `step ${event.step}: ${event.loss === null ? '' : `loss ${event.loss.toFixed(3)}, `}${evaluated} CIEDE2000 ${event.evaluation.ciede2000.toFixed(2)} ` +
            `(${event.evaluation.photos} photos), PSNR ${event.evaluation.psnr.toFixed(2)} dB, colourfulness ${event.evaluation.colourfulness.toFixed(1)}, ${hueFigures(event.evaluation)}` +
            (event.best ? ' (best so far)' : `; best ${atStep(event.bestSoFar)}`),
        );
        break;
      case 'stalled':
        progress.log(
          `no improvement since step ${event.bestStep} (validation CIEDE2000 ${choiceFigures(event)}) in ${event.patience} evaluation${event.patience === 1 ? '' : 's'}: ` +
            'stopping early (--patience)',
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
    const result = await fit({ ...options, signal: controller.signal }, onEvent);
    progress.done();
    console.log(summaryTable(result));
    const { file, report } = await writeModelCard(result, options.from, options.photos);
    console.log(`model card: ${file}, measured as restore colours on the ${report.average?.photos ?? 0} held-out photos:`);
    for (const verdict of report.verdicts) console.log(`  ${verdict.text}`);
    process.exitCode = result.stoppedBy === 'interrupted' ? ExitCode.INTERRUPTED : ExitCode.OK;
    return result;
  } finally {
    release();
    progress.done();
  }
}

/** Why a run stopped, for people. */
function stopReason(result: FitResult): string {
  switch (result.stoppedBy) {
    case 'interrupted':
      return 'interrupted; continue with --resume';
    case 'no-improvement':
      return `stopped early: no improvement on the validation photos since step ${result.validation.bestStep}`;
    default:
      return `stopped by the ${result.stoppedBy === 'time' ? 'time' : 'step'} budget`;
  }
}

/** The closing lines: which steps were chosen on what, then held-out figures before and after, beside the originals and grey. */
export function summaryTable(result: FitResult): string {
  const widths = [11, 11, 15, 11, 14, 11];
  const line = (label: string, cells: string[]): string => label.padEnd(30) + cells.map((c, i) => c.padStart(widths[i])).join('');
  const row = (label: string, e: Evaluation): string =>
    line(`  ${label}`, [
      e.ciede2000.toFixed(2),
      e.psnr.toFixed(2),
      e.colourfulness.toFixed(1),
      percent(e.rightHue),
      percent(e.falseColour),
      percent(e.leftGrey),
    ]);
  const { grey, before, after, keptStep } = result.heldOut;
  const { validation } = result;
  const onValidation =
    `CIEDE2000 ${choiceFigures(validation.before)} at start, ` +
    `best ${atStep({ step: validation.bestStep, ...validation.best })} (grey ${validation.grey.ciede2000.toFixed(2)}; ` +
    `chosen by CIEDE2000 less right hue / ${RIGHT_HUE_PER_CIEDE2000})`;
  const kept = result.options.averageOver
    ? `the weights averaged over about ${result.options.averageOver} steps are kept (--average-over)`
    : 'the last weights are kept';
  const chosen =
    result.photos.validation === 0
      ? choosesStep(result.options)
        ? 'steps chosen on the held-out photos (a run from before the validation split): the figures below are not independent'
        : `no validation photos: the held-out photos were measured along the way and nothing was chosen on them; ${kept}`
      : result.options.keep === 'best'
        ? `steps chosen on ${result.photos.validation} validation photos: ${onValidation}`
        : `on the ${result.photos.validation} validation photos: ${onValidation}; ${kept}`;
  const checkpoint = result.checkpointKept
    ? `; checkpoint kept${result.stoppedBy === 'interrupted' ? ' for --resume' : ' (--keep-checkpoint)'}`
    : '; checkpoint removed (a finished run; --keep-checkpoint keeps it)';
  return [
    `${result.mode === 'tune' ? 'tuned' : 'trained'} ${result.steps} steps (${result.crops} crops) in ${formatDuration(result.seconds)}, ${stopReason(result)}`,
    chosen,
    `model written to ${result.out} (weights of step ${keptStep})${checkpoint}`,
    line(`held-out photos (${after.photos})`, ['CIEDE2000', 'PSNR (dB)', 'colourfulness', 'right hue', 'false colour', 'left grey']),
    line('  originals', ['', '', after.originalColourfulness === undefined ? '-' : after.originalColourfulness.toFixed(1)]),
    row('grey (L* only)', grey),
    row('model before', before),
    row(`model after (step ${keptStep})`, after),
    ...(after.colouredPhotos !== undefined && after.colouredPhotos < after.photos
      ? [`  (right hue and left grey rest on the ${after.colouredPhotos} held-out photos with clearly coloured pixels)`]
      : []),
    '  (the held-out photos were never used to choose: these figures are measured once, at the end)',
  ].join('\n');
}
