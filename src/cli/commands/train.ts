/**
 * `kinhue train <photos...> --out <dir>`: trains a new model from scratch on folders of colour
 * photographs, within a time and/or step budget, resumable.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { checkFitArgs, fitOptions, fitOptionsFrom, runWithProgress, type FitArgs } from '../training-report.js';

const EXAMPLE = 'kinhue train photos/ --out models/mine --hours 2 --seed 1';

/**
 * Checks a parsed `train` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ photos: ['photos/'], out: 'models/mine', hours: 1 }); // true
 */
export function check(argv: Partial<FitArgs>): true {
  return checkFitArgs(argv, 'train', EXAMPLE);
}

type TrainArgs = FitArgs & { backbone: boolean };

export const command: CommandModule<object, TrainArgs> = {
  command: 'train <photos...>',
  describe: 'train a new model on folders of colour photographs (time budget, resumable)',
  builder: (yargs: Argv) =>
    fitOptions(yargs, 'train')
      .option('backbone', {
        type: 'boolean',
        default: true,
        describe:
          "read the shipped model's borrowed backbone (a pretrained object detector's features) beside L*; --no-backbone for L* alone",
      })
      .example(EXAMPLE, 'train for two hours; add --resume after an interruption')
      .example('kinhue train photos/ --out models/mine --steps 2000 --batch 8 --crop 96', 'a fixed number of smaller steps')
      .check((argv) => check(argv as Partial<FitArgs>)) as unknown as Argv<TrainArgs>,
  handler: async (argv: ArgumentsCamelCase<TrainArgs>) => {
    await runWithProgress({ ...fitOptionsFrom(argv, 'train'), ...(argv.backbone ? {} : { backbone: false as const }) });
  },
};
