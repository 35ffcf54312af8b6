/**
 * `kinhue tune <photos...> --out <dir> [--from <dir>]`: fine-tunes a model (the shipped one by
 * default) on an archive's own colour photographs, with a lower learning rate, keeping its class weights
 * and decoding, and the best weights on the validation photos.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { DEFAULT_MODEL_DIR } from '../../model/index.js';
import { checkFitArgs, fitOptions, fitOptionsFrom, runWithProgress, type FitArgs } from '../training-report.js';

const EXAMPLE = 'kinhue tune family-colour/ --out models/family --hours 1';

/**
 * Checks a parsed `tune` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ photos: ['family-colour/'], out: 'models/family', steps: 500 }); // true
 */
export function check(argv: Partial<FitArgs>): true {
  return checkFitArgs(argv, 'tune', EXAMPLE);
}

export const command: CommandModule<object, FitArgs> = {
  command: 'tune <photos...>',
  describe: 'fine-tune a model on your own colour photographs (keeps the best on validation photos, stops when it no longer improves)',
  builder: (yargs: Argv) =>
    fitOptions(yargs, 'tune')
      .example(EXAMPLE, 'tune the shipped model for up to an hour')
      .example('kinhue tune family-colour/ --out models/family --hours 0.5 --freeze-encoder', 'a short tune that changes only the decoder')
      .check((argv) => check(argv as Partial<FitArgs>)),
  handler: async (argv: ArgumentsCamelCase<FitArgs>) => {
    const options = fitOptionsFrom(argv, 'tune');
    await runWithProgress({ ...options, from: options.from ?? DEFAULT_MODEL_DIR });
  },
};
