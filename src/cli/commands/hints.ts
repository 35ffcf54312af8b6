/**
 * `kinhue hints <scan>`: writes a starter hints file (`<name>.hints.json` beside the scan) to edit, so that
 * `kinhue restore` gives the colours the family knows.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { writeStarterHints } from '../../hints/index.js';
import { UsageError } from '../../errors.js';
import { ExitCode } from '../exit-codes.js';

const EXAMPLE = 'kinhue hints demo-photos/scans/wrenfold-05-billy-goat.jpg';

/** The `hints` command line as yargs parses it. */
export interface HintsArgs {
  scan: string;
  out?: string;
  force: boolean;
}

/**
 * Checks a parsed `hints` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ scan: 'scans/barn.jpg' }); // true
 */
export function check(argv: Partial<HintsArgs>): true {
  const fail = (message: string): never => {
    throw new UsageError(`${message}\nExample usage: ${EXAMPLE}`);
  };
  if (typeof argv.scan !== 'string' || argv.scan.trim() === '') fail('name the scan to make a hints file for');
  if (argv.out !== undefined && (typeof argv.out !== 'string' || argv.out.trim() === '')) fail('--out needs a file name');
  if (typeof argv.out === 'string' && !argv.out.endsWith('.json')) fail(`--out should name a .json file, got ${argv.out}`);
  return true;
}

export const command: CommandModule<object, HintsArgs> = {
  command: 'hints <scan>',
  describe: 'write a starter hints file (<name>.hints.json) for a scan: colours you know, for restore to keep',
  builder: (yargs: Argv) =>
    (yargs
      .positional('scan', { type: 'string', describe: 'the scan the hints are for' })
      .option('out', { type: 'string', describe: 'where to write (default: <name>.hints.json beside the scan)' })
      .option('force', { type: 'boolean', default: false, describe: 'replace an existing hints file' })
      .example(EXAMPLE, 'writes demo-photos/scans/wrenfold-05-billy-goat.hints.json to edit')
      .epilog('Edit the entries: points {"x", "y", "colour", "radius"} and strokes {"points": [[x, y], ...], "colour", "radius"}, ' +
        'in pixels of the scan; colours as "#rrggbb", "#rgb" or "rgb(r, g, b)". An entry with an empty colour is ignored. ' +
        'restore then finds <name>.hints.json beside the scan (or in --hints <dir>). A hint sets hue and chroma; ' +
        'the scan keeps its own lightness.') as unknown as Argv<HintsArgs>)
      .check((argv) => check(argv as Partial<HintsArgs>)),
  handler: async (argv: ArgumentsCamelCase<HintsArgs>) => {
    const result = await writeStarterHints(argv.scan, { out: argv.out, force: argv.force });
    console.log(`wrote ${result.path} (${result.entries} example entries for a ${result.width} x ${result.height} scan); edit it, then run kinhue restore`);
    process.exitCode = ExitCode.OK;
  },
};
