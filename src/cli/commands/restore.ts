/**
 * `kinhue restore <inputs...> --out <dir>`: the batch colourisation run over folders of scans.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import {
  FORMAT_CHOICES, MAX_PARTS, parsePart, partFromScheduler, partLabel, restore, SCHEDULERS, type FormatChoice, type Part, type RestoreEvent, type Scheduler,
} from '../../batch/index.js';
import { UsageError } from '../../errors.js';
import { DECODINGS, type Decoding } from '../../model/index.js';
import { ExitCode } from '../exit-codes.js';
import { Progress } from '../progress.js';
import { onStopSignals } from '../stop-signals.js';
import { formatPlan, formatSummary, progressText, summaryToJson } from '../restore-report.js';

const EXAMPLE = 'kinhue restore demo-photos/scans --out demo-restored';

/** The `restore` command line as yargs parses it. */
export interface RestoreArgs {
  inputs: string[];
  out: string;
  model?: string;
  jobs?: number;
  'work-size'?: number;
  decoding?: Decoding;
  temperature?: number;
  format: FormatChoice;
  quality?: number;
  confidence: boolean;
  force: boolean;
  'dry-run': boolean;
  json: boolean;
  hints?: string | false;
  reference?: string;
  skin: boolean;
  repair: boolean;
  'repaired-scan': boolean;
  part?: string;
  'part-from'?: Scheduler;
  'part-count'?: number;
  verbose?: boolean;
}

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
  if (inputs.length === 0 || inputs.some((p) => typeof p !== 'string' || p.trim() === '')) fail('name at least one scan, folder or glob pattern');
  if (typeof argv.out !== 'string' || argv.out.trim() === '') fail('--out needs the folder to write results into');
  if (argv.model !== undefined && (typeof argv.model !== 'string' || argv.model.trim() === '')) fail('--model needs a model folder');
  const { jobs, temperature, quality, format } = argv;
  const size = argv['work-size'];
  if (jobs !== undefined && !(Number.isInteger(jobs) && jobs >= 1 && jobs <= 256)) fail(`--jobs must be a whole number from 1 to 256, got ${jobs}`);
  if (size !== undefined && !(Number.isInteger(size) && size >= 64 && size <= 4096)) fail(`--work-size must be a whole number from 64 to 4096, got ${size}`);
  if (temperature !== undefined && !(Number.isFinite(temperature) && temperature > 0 && temperature <= 1)) {
    fail(`--temperature must be above 0 and at most 1 (lower is more vivid), got ${temperature}`);
  }
  if (argv.decoding !== undefined && !DECODINGS.includes(argv.decoding)) fail(`--decoding must be one of ${DECODINGS.join(', ')}, got ${argv.decoding}`);
  if (argv.decoding === 'least-ciede2000' && temperature !== undefined) fail('--temperature applies to --decoding annealed-mean only');
  if (quality !== undefined && !(Number.isInteger(quality) && quality >= 1 && quality <= 100)) fail(`--quality must be a whole number from 1 to 100, got ${quality}`);
  if (format !== undefined && !FORMAT_CHOICES.includes(format)) fail(`--format must be one of ${FORMAT_CHOICES.join(', ')}, got ${format}`);
  if (argv.hints !== undefined && argv.hints !== false && (typeof argv.hints !== 'string' || argv.hints.trim() === '')) fail('--hints needs the folder holding <name>.hints.json files');
  if (argv.reference !== undefined && (typeof argv.reference !== 'string' || argv.reference.trim() === '')) fail('--reference needs a colour photograph or a folder of them');
  if (argv.part !== undefined) {
    if (typeof argv.part !== 'string') fail('--part must be K/N, part K of N (e.g. 2/3)');
    if (argv['part-from'] !== undefined) fail('give --part or --part-from, not both');
    parsePart(argv.part as string);
  }
  const from = argv['part-from'];
  if (from !== undefined && !SCHEDULERS.includes(from)) fail(`--part-from must be one of ${SCHEDULERS.join(', ')}, got ${from}`);
  const count = argv['part-count'];
  if (count !== undefined) {
    if (from === undefined) fail('--part-count goes with --part-from (with --part, write K/N)');
    if (!(Number.isInteger(count) && count >= 1 && count <= MAX_PARTS)) fail(`--part-count must be a whole number from 1 to ${MAX_PARTS}, got ${count}`);
  }
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
  describe: 'colourise scans in batches: results keep each scan\'s lightness, size and bit depth',
  builder: (yargs: Argv) =>
    (yargs
      .positional('inputs', { type: 'string', array: true, describe: 'scans: files, folders (searched recursively) and glob patterns' })
      .option('out', { type: 'string', demandOption: true, describe: 'folder for results, confidence maps, records and the run manifest' })
      .option('model', { type: 'string', describe: 'model folder (default: the shipped model, models/kinhue-base)' })
      .option('jobs', { type: 'number', describe: 'files restored at once, each on its own core (default: the number of cores)' })
      .option('work-size', { type: 'number', describe: 'long side in pixels at which the model runs (default 512)' })
      .option('decoding', {
        type: 'string', choices: DECODINGS as string[],
        describe: 'how colour is chosen from the model\'s prediction: least-ciede2000, the colour with the least expected error (muted where unsure), or annealed-mean, more vivid and more often wrong (default: the model\'s)',
      })
      .option('temperature', { type: 'number', describe: 'annealed-mean temperature, above 0 to 1; lower is more vivid (given alone, selects --decoding annealed-mean)' })
      .option('format', { type: 'string', choices: FORMAT_CHOICES as string[], default: 'same', describe: 'output format; same keeps each scan\'s own' })
      .option('quality', { type: 'number', describe: 'JPEG and WebP quality 1-100' })
      .option('confidence', { type: 'boolean', default: true, describe: 'write <name>.confidence.png (white = confident); --no-confidence to skip' })
      .option('force', { type: 'boolean', default: false, describe: 'redo files an earlier run finished' })
      .option('dry-run', { type: 'boolean', default: false, describe: 'list what would run; write nothing' })
      .option('json', { type: 'boolean', default: false, describe: 'print a machine-readable summary on stdout' })
      .option('hints', { type: 'string', describe: 'folder of <name>.hints.json colour hints (they are also found beside each scan; --no-hints to use none); make one with kinhue hints <scan>' })
      .option('reference', { type: 'string', describe: 'a colour photograph of the same scene or people (or a folder of them, for a series) to take colours from' })
      .option('skin', { type: 'boolean', default: true, describe: 'give the faces found a skin hue at the scan\'s own lightness (a guess: check it, correct it with hints); --no-skin to leave faces to the model' })
      .option('repair', { type: 'boolean', default: false, describe: 'take out dust, hairs and scratches before colouring; writes <name>.repair.png, white where a pixel was replaced' })
      .option('repaired-scan', { type: 'boolean', default: false, describe: 'also write the repaired scan without colour, <name>.repaired.<ext>, in the scan\'s own depth (implies --repair)' })
      .option('part', { type: 'string', describe: 'restore part K of N (K/N) of the scans, a share picked by a hash of each output name; the N parts, on as many machines, share one --out folder' })
      .option('part-from', {
        type: 'string', choices: SCHEDULERS as unknown as string[],
        describe: 'take the part from the scheduler: slurm (array task id K of the array\'s task count, the array numbered from 1) or kubernetes (Indexed Job completion index + 1, with --part-count)',
      })
      .option('part-count', { type: 'number', describe: 'the number of parts with --part-from: the Job\'s completions (kubernetes), or the array\'s size for a Slurm task resubmitted alone' })
      .example(EXAMPLE, 'restore the demo album with the shipped model')
      .example('kinhue restore "archive/**/*.tif" --out restored --format png --jobs 2', 'TIFF scans found by a glob, written as PNG on two cores')
      .example('kinhue restore demo-photos/scans --out demo-restored --reference demo-photos/originals/wrenfold-05-billy-goat.jpg', 'colours taken from a reference photograph')
      .example('kinhue restore /archive/scans --out /archive/restored --part-from slurm', 'in a Slurm array job (sbatch --array=1-N): each task restores its part; see kinhue progress')
      .epilog('Run the same command again to finish an interrupted run: finished files are skipped, failed ones retried.\n' +
        'Exit codes: 0 all done, 1 some files failed (listed), 2 usage error, 3 internal error, 4 some hints not used (listed), ' +
        '130 stopped with Ctrl-C, SIGTERM or SIGHUP.') as unknown as Argv<RestoreArgs>)
      .check((argv) => check(argv as Partial<RestoreArgs>)),
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
          for (const f of event.failures) progress.log(`${f.code === 'KH_OUTPUT_CONFLICT' ? 'conflict' : 'failed'}: ${f.rel}: ${f.code} ${f.message}`);
          if (!argv['dry-run']) {
            const of = part ? `${partLabel(part)}: ` : '';
            progress.log(`${of}restoring ${event.toRun} of ${event.files.length} files into ${event.outDir}${event.skipped ? ` (${event.skipped} finished earlier)` : ''}`);
          }
          runStart = performance.now();
          break;
        case 'backend':
          if (argv.verbose) progress.log(`backend: ${event.name} (TensorFlow.js)`);
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
        {
          inputs: argv.inputs,
          out: argv.out,
          model: argv.model,
          jobs: argv.jobs,
          workSize: argv['work-size'],
          decoding: argv.decoding,
          temperature: argv.temperature,
          format: argv.format,
          quality: argv.quality,
          confidence: argv.confidence,
          force: argv.force,
          dryRun: argv['dry-run'],
          hints: argv.hints,
          reference: argv.reference,
          skin: argv.skin,
          repair: argv.repair,
          repairedScan: argv['repaired-scan'],
          part,
          signal: soft.signal,
          hardSignal: hard.signal,
        },
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
    process.exitCode = summary.interrupted ? ExitCode.INTERRUPTED
      : summary.failed.length ? ExitCode.SOME_FAILED
      : summary.hintsNotUsed.length ? ExitCode.HINTS_NOT_USED
      : ExitCode.OK;
  },
};
