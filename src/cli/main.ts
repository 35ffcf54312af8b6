import yargs from 'yargs';
import { isKinhueError, UsageError } from '../errors.js';
import { resolveMaxPixels } from '../image/index.js';
import { VERSION } from '../version.js';
import { commands } from './commands.js';
import { ExitCode, exitCodeFor } from './exit-codes.js';

/**
 * Parses the command line and runs one verb. The only code in kinhue that prints or exits;
 * core functions return results and raise {@link KinhueError}s.
 *
 * @example
 *   await main(['restore', 'scans/', '--out', 'restored/']);
 */
export async function main(args: string[]): Promise<void> {
  // A pixel limit kinhue cannot use is refused once, here, not file by file.
  try {
    resolveMaxPixels();
  } catch (error) {
    process.exitCode = report(error, () => undefined);
    return;
  }
  const parser = yargs(args)
    .scriptName('kinhue')
    .usage(
      'kinhue <command> [options]\n\nColourise black-and-white photographs offline. A colourised photo is an interpretation, not a record.',
    )
    .version(VERSION)
    .option('verbose', {
      type: 'boolean',
      default: false,
      global: true,
      describe: 'say more: which compute backend runs the model (tfjs-node, onnxruntime, wasm or cpu)',
    })
    .help()
    .alias('h', 'help')
    .strict()
    .demandCommand(1, 'Name a command.\nExample usage: kinhue restore demo-photos/scans --out restored')
    .recommendCommands()
    .wrap(Math.min(100, process.stdout.columns || 100))
    .fail((message, error) => {
      // Validation failures arrive as a message; errors thrown by a handler arrive as `error`.
      throw error ?? new UsageError(message);
    });
  for (const command of commands) parser.command(command);

  try {
    await parser.parseAsync();
  } catch (error) {
    process.exitCode = report(error, () => parser.showHelp('error'));
  }
}

/** Prints an error for people (no stack trace unless it is a bug) and returns the exit code. */
function report(error: unknown, showHelp: () => void): number {
  const code = exitCodeFor(error);
  if (code === ExitCode.USAGE) {
    const help = !(error instanceof UsageError && !error.aboutCommandLine);
    if (help) showHelp();
    console.error(`${help ? '\n' : ''}kinhue: ${isKinhueError(error) ? error.describe() : String((error as Error).message ?? error)}`);
  } else if (isKinhueError(error)) {
    console.error(`kinhue: ${error.code} ${error.describe()}`);
  } else {
    console.error('kinhue: internal error, please report it with the command you ran:');
    console.error(error instanceof Error ? (error.stack ?? error.message) : String(error));
  }
  return code;
}
