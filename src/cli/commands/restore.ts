/**
 * `kinhue restore <inputs...> --out <dir>`: the batch colourisation run over folders of scans.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import {
  FORMAT_CHOICES,
  MAX_PARTS,
  parsePart,
  partFromScheduler,
  partLabel,
  restore,
  RESTORE_DEFAULTS,
  SCHEDULERS,
  type Part,
  type RestoreEvent,
  type RestoreOptions,
  type Scheduler,
} from '../../batch/index.js';
import { UsageError } from '../../errors.js';
import { DECODINGS } from '../../model/index.js';
import { ExitCode } from '../exit-codes.js';
import { addOptions, checkOptions, checks, coreOptions, type CliArgs, type OptionTable } from '../option-table.js';
import { Progress } from '../progress.js';
import { onStopSignals } from '../stop-signals.js';
import { formatPlan, formatSummary, progressText, summaryToJson } from '../restore-report.js';

const EXAMPLE = 'kinhue restore demo-photos/scans --out demo-restored';

/** The core options the command line offers (the rest are for callers of restore()). */
type CoreFlags = Omit<RestoreOptions, 'inputs' | 'part' | 'maxPixels' | 'signal' | 'hardSignal'>;

/** Options of the command line only: output, and the part as written or as the scheduler gives it. */
interface CommandFlags {
  json: boolean;
  part?: string;
  partFrom?: Scheduler;
  partCount?: number;
}

/** The `restore` command line as yargs parses it. */
export type RestoreArgs = { inputs: string[]; verbose?: boolean } & CliArgs<CoreFlags & CommandFlags>;

const CORE_FLAGS: OptionTable<CoreFlags> = {
  out: {
    type: 'string',
    describe: 'folder for results, confidence maps, records and the run manifest',
    check: checks.folder('out', 'the folder to write results into'),
  },
  model: {
    type: 'string',
    describe: 'model folder (default: the shipped model, models/kinhue-base)',
    check: checks.folder('model', 'a model folder'),
  },
  jobs: {
    type: 'number',
    describe: 'files restored at once, each on its own core (default: the number of cores)',
    check: checks.wholeNumber('jobs', 1, 256),
  },
  workSize: {
    type: 'number',
    describe: 'long side in pixels at which the model runs (default 512)',
    check: checks.wholeNumber('work-size', 64, 4096),
  },
  temperature: {
    type: 'number',
    describe: 'annealed-mean temperature, above 0 to 1; lower is more vivid (given alone, selects --decoding annealed-mean)',
    check: (t) =>
      Number.isFinite(t) && t > 0 && t <= 1 ? undefined : `--temperature must be above 0 and at most 1 (lower is more vivid), got ${t}`,
  },
  vividness: {
    type: 'number',
    describe:
      "how much colour least-ciede2000 dares, 0 to 1: 0 is the most cautious (more left grey), 1 the boldest (more wrong colour) (default: the model's)",
    check: checks.share('vividness', '0 cautious, 1 bold'),
  },
  decoding: {
    type: 'string',
    choices: DECODINGS,
    check: checks.oneOf('decoding', DECODINGS),
    describe:
      "how colour is chosen from the model's prediction: least-ciede2000, the colour with the least expected error (muted where unsure), or annealed-mean, more vivid and more often wrong (default: the model's)",
  },
  quality: { type: 'number', describe: 'JPEG and WebP quality 1-100', check: checks.wholeNumber('quality', 1, 100) },
  format: {
    type: 'string',
    choices: FORMAT_CHOICES,
    default: RESTORE_DEFAULTS.format,
    check: checks.oneOf('format', FORMAT_CHOICES),
    describe: "output format; same keeps each scan's own",
  },
  confidence: {
    type: 'boolean',
    default: RESTORE_DEFAULTS.confidence,
    describe: 'write <name>.confidence.png (white = confident); --no-confidence to skip',
  },
  force: { type: 'boolean', default: RESTORE_DEFAULTS.force, describe: 'redo files an earlier run finished' },
  dryRun: { type: 'boolean', default: RESTORE_DEFAULTS.dryRun, describe: 'list what would run; write nothing' },
  hints: {
    type: 'string',
    describe:
      'folder of <name>.hints.json colour hints (they are also found beside each scan; --no-hints to use none); make one with kinhue hints <scan>',
    check: (v) => (v === false ? undefined : checks.folder('hints', 'the folder holding <name>.hints.json files')(v)),
  },
  reference: {
    type: 'string',
    describe: 'a colour photograph of the same scene or people (or a folder of them, for a series) to take colours from',
    check: checks.folder('reference', 'a colour photograph or a folder of them'),
  },
  memory: {
    type: 'string',
    describe:
      "a folder of the archive's own colour photographs (the same people and places): each scan's regions take the colours of the regions in them the model sees as most alike",
    check: checks.folder('memory', 'a folder of colour photographs'),
  },
  repair: {
    type: 'boolean',
    default: RESTORE_DEFAULTS.repair,
    describe: 'take out dust, hairs and scratches before colouring; writes <name>.repair.png, white where a pixel was replaced',
  },
  repairedScan: {
    type: 'boolean',
    default: RESTORE_DEFAULTS.repairedScan,
    describe: "also write the repaired scan without colour, <name>.repaired.<ext>, in the scan's own depth (implies --repair)",
  },
  skin: {
    type: 'boolean',
    default: RESTORE_DEFAULTS.skin,
    describe:
      "give the faces found a skin hue at the scan's own lightness (a guess: check it, correct it with hints); --no-skin to leave faces to the model",
  },
};

const COMMAND_FLAGS: OptionTable<CommandFlags> = {
  json: { type: 'boolean', default: false, describe: 'print a machine-readable summary on stdout' },
  part: {
    type: 'string',
    describe:
      'restore part K of N (K/N) of the scans, a share picked by a hash of each output name; the N parts, on as many machines, share one --out folder',
    check: (v) => (typeof v === 'string' ? undefined : '--part must be K/N, part K of N (e.g. 2/3)'),
  },
  partFrom: {
    type: 'string',
    choices: SCHEDULERS,
    check: checks.oneOf('part-from', SCHEDULERS),
    describe:
      "take the part from the scheduler: slurm (array task id K of the array's task count, the array numbered from 1) or kubernetes (Indexed Job completion index + 1, with --part-count)",
  },
  partCount: {
    type: 'number',
    check: checks.wholeNumber('part-count', 1, MAX_PARTS),
    describe:
      "the number of parts with --part-from: the Job's completions (kubernetes), or the array's size for a Slurm task resubmitted alone",
  },
};

/**
 * Checks a parsed `restore` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ inputs: ['scans/'], out: 'restored/' }); // true
 */
export function check(argv: Partial<RestoreArgs>): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${EXAMPLE}`);
  };
  const inputs = argv.inputs ?? [];
  if (inputs.length === 0 || inputs.some((p) => typeof p !== 'string' || p.trim() === ''))
    fail('name at least one scan, folder or glob pattern');
  if (argv.out === undefined) fail('--out needs the folder to write results into');
  checkOptions(argv, CORE_FLAGS, EXAMPLE);
  if (argv.decoding === 'least-ciede2000' && argv.temperature !== undefined) fail('--temperature applies to --decoding annealed-mean only');
  if (argv.vividness !== undefined && (argv.decoding === 'annealed-mean' || argv.temperature !== undefined))
    fail('--vividness applies to --decoding least-ciede2000 only (annealed mean takes --temperature)');
  checkOptions(argv, COMMAND_FLAGS, EXAMPLE);
  if (argv.part !== undefined) {
    if (argv['part-from'] !== undefined) fail('give --part or --part-from, not both');
    parsePart(argv.part);
  }
  if (argv['part-count'] !== undefined && argv['part-from'] === undefined)
    fail('--part-count goes with --part-from (with --part, write K/N)');
  return true;
}

/**
 * The part a `restore` command line asks for: --part K/N, or the scheduler's task with --part-from.
 * @example
 *   partOfCommand({ 'part-from': 'slurm' }, process.env); // { index: 2, count: 3 } in Slurm array task 2 of 3
 */
export function partOfCommand(argv: Partial<RestoreArgs>, env: NodeJS.ProcessEnv): Part | undefined {
  if (argv.part !== undefined) return parsePart(argv.part);
  if (argv['part-from'] !== undefined) return partFromScheduler(argv['part-from'], env, argv['part-count']);
  return undefined;
}

export const command: CommandModule<object, RestoreArgs> = {
  command: 'restore <inputs...>',
  describe: "colourise scans in batches: results keep each scan's lightness, size and bit depth",
  builder: (yargs: Argv) =>
    (
      addOptions(addOptions(yargs, CORE_FLAGS), COMMAND_FLAGS)
        .positional('inputs', { type: 'string', array: true, describe: 'scans: files, folders (searched recursively) and glob patterns' })
        .demandOption('out')
        .example(EXAMPLE, 'restore the demo album with the shipped model')
        .example(
          'kinhue restore "archive/**/*.tif" --out restored --format png --jobs 2',
          'TIFF scans found by a glob, written as PNG on two cores',
        )
        .example(
          'kinhue restore demo-photos/scans --out demo-restored --reference demo-photos/originals/wrenfold-05-billy-goat.jpg',
          'colours taken from a reference photograph',
        )
        .example(
          'kinhue restore /archive/scans --out /archive/restored --part-from slurm',
          'in a Slurm array job (sbatch --array=1-N): each task restores its part; see kinhue progress',
        )
        .epilog(
          'Run the same command again to finish an interrupted run: finished files are skipped, failed ones retried.\n' +
            'Exit codes: 0 all done, 1 some files failed (listed), 2 usage error, 3 internal error, 4 some hints not used (listed), ' +
            '130 stopped with Ctrl-C, SIGTERM or SIGHUP.',
        ) as unknown as Argv<RestoreArgs>
    ).check((argv) => check(argv as Partial<RestoreArgs>)),
  handler: async (argv: ArgumentsCamelCase<RestoreArgs>) => {
    const part = partOfCommand(argv, process.env);
    const progress = new Progress({ plainInterval: 0 });
    const soft = new AbortController();
    const hard = new AbortController();
    let interrupts = 0;
    const onStop = (): void => {
      interrupts++;
      if (interrupts === 1) {
        progress.log('stopping: no new file starts, files in progress finish (Ctrl-C again to stop at once)');
        soft.abort();
      } else hard.abort();
    };
    let runStart = 0;
    const onEvent = (event: RestoreEvent): void => {
      switch (event.type) {
        case 'plan':
          for (const note of event.notes) progress.log(`note: ${note}`);
          for (const f of event.failures)
            progress.log(`${f.code === 'KH_OUTPUT_CONFLICT' ? 'conflict' : 'failed'}: ${f.rel}: ${f.code} ${f.message}`);
          if (!argv['dry-run']) {
            const of = part ? `${partLabel(part)}: ` : '';
            progress.log(
              `${of}restoring ${event.toRun} of ${event.files.length} files into ${event.outDir}${event.skipped ? ` (${event.skipped} finished earlier)` : ''}`,
            );
          }
          runStart = performance.now();
          break;
        case 'backend':
          if (argv.verbose)
            progress.log(`backend: ${event.name} (${event.name === 'onnxruntime' ? 'ONNX Runtime runs the model' : 'TensorFlow.js'})`);
          if (event.warning) progress.log(`warning: ${event.warning}`);
          break;
        case 'done':
        case 'failed': {
          const text = progressText(event.done, event.failed, event.total, (performance.now() - runStart) / 1000);
          if (event.type === 'failed') progress.log(`failed: ${event.rel}: ${event.failure.code} ${event.failure.message}`);
          else if (!process.stderr.isTTY) progress.log(`done: ${event.rel} -> ${event.output} (${event.seconds.toFixed(1)} s)`);
          if (event.type === 'done') for (const w of event.warnings) progress.log(`  ${event.rel}: ${w}`);
          if (process.stderr.isTTY) progress.update((event.done + event.failed) / event.total, text, true);
          else progress.log(text);
          break;
        }
        case 'start':
        case 'stopping':
          break;
      }
    };
    const release = onStopSignals(onStop);
    let summary;
    try {
      summary = await restore(
        { ...coreOptions(argv, CORE_FLAGS), inputs: argv.inputs, out: argv.out, part, signal: soft.signal, hardSignal: hard.signal },
        onEvent,
      );
    } finally {
      release();
      progress.done();
    }
    if (argv.json) process.stdout.write(summaryToJson(summary));
    else {
      if (summary.dryRun) console.log(formatPlan(summary.files));
      console.log(formatSummary(summary));
    }
    process.exitCode = summary.interrupted
      ? ExitCode.INTERRUPTED
      : summary.failed.length
        ? ExitCode.SOME_FAILED
        : summary.hintsNotUsed.length
          ? ExitCode.HINTS_NOT_USED
          : ExitCode.OK;
  },
};
