/**
 * `kinhue hints <scan>`: writes a starter hints file (`<name>.hints.json` beside the scan) to edit, so that
 * `kinhue restore` gives the colours the family knows.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { writeStarterHints, type StarterOptions } from '../../hints/index.js';
import { UsageError } from '../../errors.js';
import { ExitCode } from '../exit-codes.js';
import { addOptions, checkOptions, coreOptions, type CliArgs, type OptionTable } from '../option-table.js';

const EXAMPLE = 'kinhue hints demo-photos/scans/wrenfold-05-billy-goat.jpg';

/** The core options the command line offers. */
type CoreFlags = Required<Pick<StarterOptions, 'force'>> & Pick<StarterOptions, 'out'>;

/** The `hints` command line as yargs parses it. */
export type HintsArgs = { scan: string } & CliArgs<CoreFlags>;

const CORE_FLAGS: OptionTable<CoreFlags> = {
  out: {
    type: 'string',
    describe: 'where to write (default: <name>.hints.json beside the scan)',
    check: (o) =>
      typeof o !== 'string' || o.trim() === ''
        ? '--out needs a file name'
        : !o.endsWith('.json')
          ? `--out should name a .json file, got ${o}`
          : undefined,
  },
  force: { type: 'boolean', default: false, describe: 'replace an existing hints file' },
};

/**
 * Checks a parsed `hints` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ scan: 'scans/barn.jpg' }); // true
 */
export function check(argv: Partial<HintsArgs>): true {
  if (typeof argv.scan !== 'string' || argv.scan.trim() === '')
    throw new UsageError(`name the scan to make a hints file for\nExample usage: ${EXAMPLE}`);
  checkOptions(argv, CORE_FLAGS, EXAMPLE);
  return true;
}

export const command: CommandModule<object, HintsArgs> = {
  command: 'hints <scan>',
  describe: 'write a starter hints file (<name>.hints.json) for a scan: colours you know, for restore to keep',
  builder: (yargs: Argv) =>
    (
      addOptions(yargs, CORE_FLAGS)
        .positional('scan', { type: 'string', describe: 'the scan the hints are for' })
        .example(EXAMPLE, 'writes demo-photos/scans/wrenfold-05-billy-goat.hints.json to edit')
        .epilog(
          'Edit the entries: points {"x", "y", "colour", "radius"} and strokes {"points": [[x, y], ...], "colour", "radius"}, ' +
            'in pixels of the scan; colours as "#rrggbb", "#rgb" or "rgb(r, g, b)". An entry with an empty colour is ignored. ' +
            'restore then finds <name>.hints.json beside the scan (or in --hints <dir>). A hint sets hue and chroma; ' +
            'the scan keeps its own lightness.',
        ) as unknown as Argv<HintsArgs>
    ).check((argv) => check(argv as Partial<HintsArgs>)),
  handler: async (argv: ArgumentsCamelCase<HintsArgs>) => {
    const result = await writeStarterHints(argv.scan, coreOptions(argv, CORE_FLAGS));
    console.log(
      `wrote ${result.path} (${result.entries} example entries for a ${result.width} x ${result.height} scan); edit it, then run kinhue restore`,
    );
    process.exitCode = ExitCode.OK;
  },
};
