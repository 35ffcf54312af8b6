/**
 * `kinhue train-repair <photos> --out <dir>`: rebuilds the repair network (dust, hairs, scratches) from a
 * folder of photographs, damaged by kinhue's own generator as it trains.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { UsageError } from '../../errors.js';
import { initBackend } from '../../model/index.js';
import { trainRepairModel } from '../../repair/index.js';
import { ExitCode } from '../exit-codes.js';
import { onStopSignals } from '../stop-signals.js';

const EXAMPLE = 'kinhue train-repair .data/pool --out models/kinhue-repair --minutes 50';

/** The `train-repair` command line as yargs parses it. */
export interface TrainRepairArgs {
  photos: string;
  out: string;
  steps: number;
  minutes?: number;
  seed: number;
}

/**
 * Checks a parsed `train-repair` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ photos: 'pool/', out: 'models/repair', steps: 100, seed: 1 }); // true
 */
export function check(argv: Partial<TrainRepairArgs>): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${EXAMPLE}`);
  };
  if (typeof argv.photos !== 'string' || argv.photos.trim() === '') fail('name the folder of photographs to learn from');
  if (typeof argv.out !== 'string' || argv.out.trim() === '') fail('--out needs the model folder to write');
  if (argv.steps !== undefined && !(Number.isInteger(argv.steps) && argv.steps >= 1))
    fail(`--steps must be a whole number of 1 or more, got ${argv.steps}`);
  if (argv.minutes !== undefined && !(Number.isFinite(argv.minutes) && argv.minutes > 0))
    fail(`--minutes must be above 0, got ${argv.minutes}`);
  if (argv.seed !== undefined && !Number.isInteger(argv.seed)) fail(`--seed must be a whole number, got ${argv.seed}`);
  return true;
}

export const command: CommandModule<object, TrainRepairArgs> = {
  command: 'train-repair <photos>',
  describe: "train the repair network (dust, hairs, scratches) on a folder of photographs, damaged by kinhue's own generator",
  builder: (yargs: Argv) =>
    (
      yargs
        .positional('photos', { type: 'string', describe: 'a folder of photographs (a tenth, seed 1, is held out for the benchmark)' })
        .option('out', { type: 'string', demandOption: true, describe: 'the model folder to write (saved every 5 minutes and at the end)' })
        .option('steps', { type: 'number', default: 8000, describe: 'most optimiser steps of 8 crops' })
        .option('minutes', { type: 'number', describe: 'time budget; the run stops at the steps or the minutes, whichever comes first' })
        .option('seed', { type: 'number', default: 1, describe: 'seed of the crops, the damage and the initial weights' })
        .example(EXAMPLE, 'rebuild the shipped repair model from the training pool')
        .epilog(
          'Ctrl-C, SIGTERM or SIGHUP stops after the current step and saves the model (exit code 130).',
        ) as unknown as Argv<TrainRepairArgs>
    ).check((argv) => check(argv as Partial<TrainRepairArgs>)),
  handler: async (argv: ArgumentsCamelCase<TrainRepairArgs>) => {
    const backend = await initBackend();
    if (backend.warning) console.error(`note: ${backend.warning}`);
    const stop = new AbortController();
    const off = onStopSignals(() => stop.abort());
    try {
      const result = await trainRepairModel(
        { photos: argv.photos, out: argv.out, steps: argv.steps, minutes: argv.minutes, seed: argv.seed, signal: stop.signal },
        (event) => {
          if (event.type === 'photos') console.error(`${event.train} photos to learn from, ${event.holdout} held out`);
          else if (event.type === 'step' && event.step % 100 === 0) {
            console.error(
              `step ${event.step}: loss ${event.loss.toFixed(4)} (mask ${event.maskLoss.toFixed(4)}, fill ${event.fillLoss.toFixed(4)}), ${event.seconds.toFixed(0)} s`,
            );
          } else if (event.type === 'saved') console.error(`saved ${event.dir} at step ${event.step}`);
        },
      );
      console.log(
        `wrote ${argv.out}: ${result.steps} steps in ${(result.seconds / 60).toFixed(1)} minutes; measure it with npm run bench -- repair`,
      );
      process.exitCode = stop.signal.aborted ? ExitCode.INTERRUPTED : ExitCode.OK;
    } finally {
      off();
    }
  },
};
