/**
 * `kinhue tune <photos...> --out <dir> [--from <dir>]`: fine-tunes a model (the shipped one by
 * default) on an archive's own colour photographs, with a lower learning rate, keeping the best
 * weights by held-out error.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { UsageError } from '../../errors.js';
import { DEFAULT_MODEL_DIR } from '../../model/index.js';
import { fit } from '../../training/index.js';
import { checkFitArgs, fitOptions, fitOptionsFrom, runWithProgress, type FitArgs } from '../training-report.js';

const EXAMPLE = 'kinhue tune family-colour/ --out models/family --hours 1';

export interface TuneArgs extends FitArgs {
  from?: string;
  'freeze-encoder': boolean;
}

/**
 * Checks a parsed `tune` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ photos: ['family-colour/'], out: 'models/family', steps: 500 }); // true
 */
export function check(argv: Partial<TuneArgs>): true {
  checkFitArgs(argv, EXAMPLE);
  if (argv.from !== undefined && argv.from.trim() === '') throw new UsageError(`--from needs a model folder\nExample usage: ${EXAMPLE} --from models/kinhue-base`);
  return true;
}

export const command: CommandModule<object, TuneArgs> = {
  command: 'tune <photos...>',
  describe: 'fine-tune a model on your own colour photographs (keeps the best by held-out error)',
  builder: (yargs: Argv) =>
    fitOptions(yargs)
      .option('from', { type: 'string', describe: 'model folder to start from (default: the shipped model)' })
      .option('freeze-encoder', { type: 'boolean', default: false, describe: 'keep the encoder fixed; learn only the decoder (small archives)' })
      .option('learning-rate', { type: 'number', describe: 'optimiser learning rate (default 1e-4, a tenth of train\'s)' })
      .example(EXAMPLE, 'tune the shipped model for an hour')
      .example('kinhue tune family-colour/ --out models/family --steps 300 --freeze-encoder', 'a short tune that changes only the decoder')
      .check((argv) => check(argv as Partial<TuneArgs>)),
  handler: async (argv: ArgumentsCamelCase<TuneArgs>) => {
    await runWithProgress('tune', (signal, onEvent) =>
      fit(
        { ...fitOptionsFrom(argv), mode: 'tune', from: argv.from ?? DEFAULT_MODEL_DIR, freezeEncoder: argv['freeze-encoder'], signal },
        onEvent,
      ),
    );
  },
};
