/**
 * `kinhue progress <restore output folder>`: how far a run has got, per part and in all (done, failed,
 * pending, rate, time left), read from the folder's manifests; safe while parts are at work.
 */
import type { ArgumentsCamelCase, Argv, CommandModule } from 'yargs';
import { loadRunFolder, MANIFEST_NAME, runProgress, type PartProgress, type RunProgress } from '../../batch/index.js';
import { ErrorCodes, KinhueError, UsageError } from '../../errors.js';
import { renderTable } from '../../report/index.js';
import { ExitCode } from '../exit-codes.js';
import { addOptions, type CliArgs, type OptionTable } from '../option-table.js';
import { formatDuration } from '../progress.js';

const EXAMPLE = 'kinhue progress /archive/restored';

/** Options of the command line only (the core reads a run folder and takes no options). */
interface CommandFlags {
  json: boolean;
}

/** The `progress` command line as yargs parses it. */
export type ProgressArgs = { run: string } & CliArgs<CommandFlags>;

const COMMAND_FLAGS: OptionTable<CommandFlags> = {
  json: { type: 'boolean', default: false, describe: 'print the figures as JSON' },
};

/**
 * Checks a parsed `progress` command line. Pure: throws UsageError with an example.
 * @example
 *   check({ run: 'restored' }); // true
 */
export function check(argv: Partial<ProgressArgs>): true {
  if (typeof argv.run !== 'string' || argv.run.trim() === '')
    throw new UsageError(`name the output folder of a restore run\nExample usage: ${EXAMPLE}`);
  return true;
}

/**
 * The progress as a table for people, as of `now`.
 * @example
 *   console.log(formatRunProgress(progress, Date.now()));
 */
export function formatRunProgress(p: RunProgress, now: number): string {
  const count = (n: number | null): string => (n === null ? '-' : String(n));
  const rate = (perMinute: number | null): string => (perMinute === null ? '-' : perMinute.toFixed(1));
  const left = (seconds: number | null, pending: number | null): string =>
    pending === 0 ? 'finished' : seconds === null ? '-' : `~${formatDuration(seconds)}`;
  const row = (r: PartProgress): string[] => [
    r.part ? `${r.part.index}/${r.part.count}` : 'all',
    count(r.files),
    String(r.done),
    String(r.failed),
    count(r.pending),
    rate(r.perMinute),
    r.started === null ? 'not started' : left(r.secondsLeft, r.pending),
    r.lastRecord ? `${formatDuration((now - Date.parse(r.lastRecord)) / 1000)} ago` : '-',
    r.host ?? '-',
  ];
  const t = p.total;
  const rows = p.parts.map(row);
  const columns = [
    { label: 'part' },
    { label: 'scans', align: 'right' },
    { label: 'done', align: 'right' },
    { label: 'failed', align: 'right' },
    { label: 'pending', align: 'right' },
    { label: 'per min', align: 'right' },
    { label: 'time left', align: 'right' },
    { label: 'last record', align: 'right' },
    { label: 'machine' },
  ] as const;
  const lines = [
    `${p.folder}: ${p.split ? `a run split into ${p.split} parts` : 'a run of all scans'}${p.settings ? `, settings ${p.settings}` : ''}`,
    renderTable(
      columns,
      p.split
        ? [
            ...rows,
            [
              'total',
              count(t.files),
              String(t.done),
              String(t.failed),
              count(t.pending),
              rate(t.perMinute),
              left(t.secondsLeft, t.pending),
              '',
              '',
            ],
          ]
        : rows,
    ),
  ];
  const waiting = p.parts.filter((r) => r.started === null).length;
  if (waiting)
    lines.push(
      `${waiting} part${waiting === 1 ? ' has' : 's have'} not started: the total counts every scan found, the time left only parts at work`,
    );
  for (const note of p.notes) lines.push(`note: ${note}`);
  return lines.join('\n');
}

export const command: CommandModule<object, ProgressArgs> = {
  command: 'progress <run>',
  describe: 'say how far a restore run has got: done, failed and pending scans per part and in all, the rate and the time left',
  builder: (yargs: Argv) =>
    (
      addOptions(yargs, COMMAND_FLAGS)
        .positional('run', { type: 'string', describe: 'the output folder of a restore run (--out), split into parts or not' })
        .example(EXAMPLE, 'while a Slurm array or Kubernetes Job restores into /archive/restored')
        .epilog(
          'Reads only: run it as often as you like while parts are at work. Per minute counts scans finished since a part last ' +
            'started; time left is pending scans at that rate.',
        ) as unknown as Argv<ProgressArgs>
    ).check((argv) => check(argv as Partial<ProgressArgs>)),
  handler: async (argv: ArgumentsCamelCase<ProgressArgs>) => {
    const run = await loadRunFolder(argv.run);
    if (run.manifests.length === 0) {
      throw new KinhueError(
        ErrorCodes.UNREADABLE,
        `holds no ${MANIFEST_NAME} (nor one per part): not the output folder of a restore run, or none has started`,
        {
          file: argv.run,
          hint: 'pass the folder given to kinhue restore as --out',
        },
      );
    }
    const now = Date.now();
    const progress = runProgress(run, now);
    if (argv.json) process.stdout.write(`${JSON.stringify(progress, null, 2)}\n`);
    else console.log(formatRunProgress(progress, now));
    process.exitCode = ExitCode.OK;
  },
};
