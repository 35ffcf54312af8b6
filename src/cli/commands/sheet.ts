/**
 * `kinhue sheet <restore output folder> [-o <file.html>] [--embed]`: one HTML page for reviewing a
 * restore run side by side in a browser, offline.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { UsageError } from '../../errors.js';
import { makeSheet } from '../../report/index.js';
import { ExitCode } from '../exit-codes.js';

const EXAMPLE = 'kinhue sheet demo-restored -o demo-restored/review.html';

/** The `sheet` command line as yargs parses it. */
export interface SheetArgs {
  run: string;
  output?: string;
  embed: boolean;
}

/**
 * Checks a parsed `sheet` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ run: 'restored', output: 'restored/review.html' }); // true
 */
export function check(argv: Partial<SheetArgs>): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${EXAMPLE}`);
  };
  if (typeof argv.run !== 'string' || argv.run.trim() === '') fail('name the output folder of a restore run');
  if (argv.output !== undefined) {
    if (typeof argv.output !== 'string' || argv.output.trim() === '') fail('-o needs a file name ending in .html');
    if (!/\.html?$/i.test(argv.output as string)) fail(`-o must name an .html file, got ${argv.output}`);
  }
  return true;
}

export const command: CommandModule<object, SheetArgs> = {
  command: 'sheet <run>',
  describe: 'make one HTML page to review a restore run: scan, result and confidence side by side',
  builder: (yargs: Argv) =>
    (yargs
      .positional('run', { type: 'string', describe: 'the output folder of a restore run' })
      .option('output', { alias: 'o', type: 'string', describe: 'the page to write (default: <run>/kinhue-sheet.html)' })
      .option('embed', { type: 'boolean', default: false, describe: 'put the pictures inside the page (as previews) instead of linking to them' })
      .example(EXAMPLE, 'review the demo run; open the page in any browser, no network needed')
      .example('kinhue sheet restored -o review.html --embed', 'a single file to send or archive, pictures included') as unknown as Argv<SheetArgs>)
      .check((argv) => check(argv as Partial<SheetArgs>)),
  handler: async (argv: ArgumentsCamelCase<SheetArgs>) => {
    const sheet = await makeSheet({ run: argv.run, output: argv.output, embed: argv.embed });
    const failed = sheet.failed ? `, ${sheet.failed} failed` : '';
    console.log(`wrote ${sheet.output} (${sheet.restored} restored${failed}); open it in a browser`);
    process.exitCode = ExitCode.OK;
  },
};
