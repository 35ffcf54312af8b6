/**
 * `kinhue score <colour photos...> [--model <dir>]... [--out <dir>] [--json]`: takes the colour
 * out of colour originals, puts it back with each model and two baselines, and measures how close
 * each comes to the original.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { UsageError } from '../../errors.js';
import { formatScoreTable, score, scoreToJson, writeScoreFiles, type ScoreEvent } from '../../report/index.js';
import { ExitCode } from '../exit-codes.js';
import { Progress } from '../progress.js';

const EXAMPLE = 'kinhue score demo-photos/originals --model models/kinhue-base --model models/mine';

/** The `score` command line as yargs parses it. */
export interface ScoreArgs {
  photos: string[];
  model?: string[];
  out?: string;
  json: boolean;
  'work-size'?: number;
  skin: boolean;
}

/**
 * Checks a parsed `score` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ photos: ['originals/'], model: ['models/a', 'models/b'] }); // true
 */
export function check(argv: Partial<ScoreArgs>): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${EXAMPLE}`);
  };
  const photos = argv.photos ?? [];
  if (photos.length === 0 || photos.some((p) => typeof p !== 'string' || p.trim() === '')) fail('name at least one colour photo or folder of them');
  const models = argv.model ?? [];
  if (models.some((m) => typeof m !== 'string' || m.trim() === '')) fail('--model needs a model folder');
  if (new Set(models).size !== models.length) fail('the same --model is named twice');
  if (argv.out !== undefined && (typeof argv.out !== 'string' || argv.out.trim() === '')) fail('--out needs a folder');
  const size = argv['work-size'];
  if (size !== undefined && !(Number.isInteger(size) && size >= 64 && size <= 4096)) fail(`--work-size must be a whole number from 64 to 4096, got ${size}`);
  return true;
}

export const command: CommandModule<object, ScoreArgs> = {
  command: 'score <photos...>',
  describe: 'measure models against colour originals, beside a grey and a colour-transfer baseline',
  builder: (yargs: Argv) =>
    (yargs
      .positional('photos', { type: 'string', array: true, describe: 'colour originals: files and folders (searched recursively)' })
      .option('model', { type: 'string', array: true, describe: 'model folder; repeat to compare models (default: the shipped model)' })
      .option('out', { type: 'string', describe: `folder to write kinhue-score.csv and kinhue-score.json into` })
      .option('json', { type: 'boolean', default: false, describe: 'print the report as JSON instead of a table' })
      .option('work-size', { type: 'number', describe: 'long side in pixels at which the model runs (as for restore)' })
      .option('skin', { type: 'boolean', default: true, describe: 'give the faces found a skin hue, as restore does; --no-skin to score the model alone' })
      .example(EXAMPLE, 'compare the shipped model with a tuned one on the demo originals')
      .example('kinhue score originals/ --out scores/ --json', 'write CSV and JSON, and print JSON') as unknown as Argv<ScoreArgs>)
      .check((argv) => check(argv as Partial<ScoreArgs>)),
  handler: async (argv: ArgumentsCamelCase<ScoreArgs>) => {
    const progress = new Progress();
    const onEvent = (event: ScoreEvent): void => {
      if (event.type === 'photo') progress.update(event.done / event.total, `scoring ${event.done}/${event.total}  ${event.file}`, event.done === event.total);
    };
    const report = await score({ photos: argv.photos, models: argv.model, workSize: argv['work-size'], skin: argv.skin, out: argv.out, onEvent });
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
