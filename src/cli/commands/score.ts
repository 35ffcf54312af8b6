/**
 * `kinhue score <colour photos...> [--model <dir>]... [--out <dir>] [--json]`: takes the colour
 * out of colour originals, puts it back with each model and two baselines, and measures how close
 * each comes to the original.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { UsageError } from '../../errors.js';
import { formatScoreTable, score, scoreToJson, writeScoreFiles, type ScoreEvent, type ScoreOptions } from '../../report/index.js';
import { ExitCode } from '../exit-codes.js';
import { addOptions, checkOptions, checks, coreOptions, type CliArgs, type OptionTable } from '../option-table.js';
import { Progress } from '../progress.js';

const EXAMPLE = 'kinhue score demo-photos/originals --model models/kinhue-base --model models/mine';

/** The core options the command line offers. */
type CoreFlags = Pick<ScoreOptions, 'out' | 'workSize' | 'vividness' | 'skin' | 'memory'>;

/** Options of the command line only: `--model`, repeated, gives the core's `models`. */
interface CommandFlags {
  model?: string[];
  json: boolean;
}

/** The `score` command line as yargs parses it. */
export type ScoreArgs = { photos: string[] } & CliArgs<CoreFlags & CommandFlags>;

const CORE_FLAGS: OptionTable<CoreFlags> = {
  out: { type: 'string', describe: 'folder to write kinhue-score.csv and kinhue-score.json into', check: checks.folder('out', 'a folder') },
  workSize: {
    type: 'number',
    describe: 'long side in pixels at which the model runs (as for restore)',
    check: checks.wholeNumber('work-size', 64, 4096),
  },
  vividness: {
    type: 'number',
    describe:
      "how much colour each model dares, 0 to 1: 0 is the most cautious (more left grey), 1 the boldest (more wrong colour) (default: each model's own)",
    check: checks.share('vividness', '0 cautious, 1 bold'),
  },
  skin: {
    type: 'boolean',
    default: true,
    describe: 'give the faces found a skin hue, as restore does; --no-skin to score the model alone',
  },
  memory: {
    type: 'string',
    describe: "a folder of colour photographs used as restore's --memory: each model is scored alone and with it",
    check: checks.folder('memory', 'a folder of colour photographs'),
  },
};

const COMMAND_FLAGS: OptionTable<CommandFlags> = {
  model: {
    type: 'string',
    array: true,
    describe: 'model folder; repeat to compare models (default: the shipped model)',
    check: (models) =>
      models.some((m) => typeof m !== 'string' || m.trim() === '')
        ? '--model needs a model folder'
        : new Set(models).size !== models.length
          ? 'the same --model is named twice'
          : undefined,
  },
  json: { type: 'boolean', default: false, describe: 'print the report as JSON instead of a table' },
};

/**
 * Checks a parsed `score` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ photos: ['originals/'], model: ['models/a', 'models/b'] }); // true
 */
export function check(argv: Partial<ScoreArgs>): true {
  const photos = argv.photos ?? [];
  if (photos.length === 0 || photos.some((p) => typeof p !== 'string' || p.trim() === '')) {
    throw new UsageError(`name at least one colour photo or folder of them\nExample usage: ${EXAMPLE}`);
  }
  checkOptions(argv, COMMAND_FLAGS, EXAMPLE);
  checkOptions(argv, CORE_FLAGS, EXAMPLE);
  return true;
}

export const command: CommandModule<object, ScoreArgs> = {
  command: 'score <photos...>',
  describe: 'measure models against colour originals, beside a grey and a colour-transfer baseline',
  builder: (yargs: Argv) =>
    (
      addOptions(addOptions(yargs, COMMAND_FLAGS), CORE_FLAGS)
        .positional('photos', { type: 'string', array: true, describe: 'colour originals: files and folders (searched recursively)' })
        .example(EXAMPLE, 'compare the shipped model with a tuned one on the demo originals')
        .example('kinhue score originals/ --out scores/ --json', 'write CSV and JSON, and print JSON')
        .example(
          'kinhue score farm-album/test --memory farm-album/tune',
          'the shipped model alone and with a colour memory of other photos of the same places',
        ) as unknown as Argv<ScoreArgs>
    ).check((argv) => check(argv as Partial<ScoreArgs>)),
  handler: async (argv: ArgumentsCamelCase<ScoreArgs>) => {
    const progress = new Progress();
    const onEvent = (event: ScoreEvent): void => {
      if (event.type === 'photo')
        progress.update(event.done / event.total, `scoring ${event.done}/${event.total}  ${event.file}`, event.done === event.total);
    };
    const report = await score({ ...coreOptions(argv, CORE_FLAGS), photos: argv.photos, models: argv.model, onEvent });
    progress.done();
    if (argv.out) {
      const files = await writeScoreFiles(report, argv.out);
      (argv.json ? console.error : console.log)(`wrote ${files.csv} and ${files.json}`);
    }
    if (argv.json) process.stdout.write(scoreToJson(report));
    else console.log(formatScoreTable(report));
    process.exitCode = report.failures.length ? ExitCode.SOME_FAILED : ExitCode.OK;
  },
};
