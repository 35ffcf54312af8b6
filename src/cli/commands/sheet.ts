/**
 * `kinhue sheet <restore output folder> [-o <file.html>] [--embed]`: one HTML page for reviewing a
 * restore run side by side in a browser, offline.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { UsageError } from '../../errors.js';
import { makeSheet, SHEET_DEFAULTS, type SheetOptions } from '../../report/index.js';
import { ExitCode } from '../exit-codes.js';
import { addOptions, checkOptions, coreOptions, type CliArgs, type OptionTable } from '../option-table.js';

const EXAMPLE = 'kinhue sheet demo-restored -o demo-restored/review.html';

/** The core options the command line offers. */
type CoreFlags = Required<Pick<SheetOptions, 'embed'>> & Pick<SheetOptions, 'output'>;

/** The `sheet` command line as yargs parses it. */
export type SheetArgs = { run: string } & CliArgs<CoreFlags>;

const CORE_FLAGS: OptionTable<CoreFlags> = {
  output: {
    type: 'string',
    alias: 'o',
    describe: 'the page to write (default: <run>/kinhue-sheet.html)',
    check: (o) =>
      typeof o !== 'string' || o.trim() === ''
        ? '-o needs a file name ending in .html'
        : !/\.html?$/i.test(o)
          ? `-o must name an .html file, got ${o}`
          : undefined,
  },
  embed: {
    type: 'boolean',
    default: SHEET_DEFAULTS.embed,
    describe: 'put the pictures inside the page (as previews) instead of linking to them',
  },
};

/**
 * Checks a parsed `sheet` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ run: 'restored', output: 'restored/review.html' }); // true
 */
export function check(argv: Partial<SheetArgs>): true {
  if (typeof argv.run !== 'string' || argv.run.trim() === '')
    throw new UsageError(`name the output folder of a restore run\nExample usage: ${EXAMPLE}`);
  checkOptions(argv, CORE_FLAGS, EXAMPLE);
  return true;
}

export const command: CommandModule<object, SheetArgs> = {
  command: 'sheet <run>',
  describe: 'make one HTML page to review a restore run: scan, result and confidence side by side',
  builder: (yargs: Argv) =>
    (
      addOptions(yargs, CORE_FLAGS)
        .positional('run', { type: 'string', describe: 'the output folder of a restore run' })
        .example(EXAMPLE, 'review the demo run; open the page in any browser, no network needed')
        .example(
          'kinhue sheet restored -o review.html --embed',
          'a single file to send or archive, pictures included',
        ) as unknown as Argv<SheetArgs>
    ).check((argv) => check(argv as Partial<SheetArgs>)),
  handler: async (argv: ArgumentsCamelCase<SheetArgs>) => {
    const sheet = await makeSheet({ ...coreOptions(argv, CORE_FLAGS), run: argv.run });
    const failed = sheet.failed ? `, ${sheet.failed} failed` : '';
    console.log(`wrote ${sheet.output} (${sheet.restored} restored${failed}); open it in a browser`);
    process.exitCode = ExitCode.OK;
  },
};
