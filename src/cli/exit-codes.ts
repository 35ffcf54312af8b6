import { ErrorCodes, isKinhueError } from '../errors.js';

/** Process exit codes, documented in the README. */
export const ExitCode = {
  /** Everything asked for was done. */
  OK: 0,
  /** The run finished, but some inputs failed (listed in the summary). */
  SOME_FAILED: 1,
  /** The command line was wrong; nothing was done. */
  USAGE: 2,
  /** A bug or an unexpected failure in kinhue itself. */
  INTERNAL: 3,
  /** Stopped with Ctrl-C: finished files are complete, the next run goes on from there (128 + SIGINT). */
  INTERRUPTED: 130,
} as const;

/** The exit code for an error that stopped a whole command. */
export function exitCodeFor(error: unknown): number {
  if (isKinhueError(error)) return error.code === ErrorCodes.USAGE ? ExitCode.USAGE : ExitCode.SOME_FAILED;
  if (error instanceof Error && error.name === 'YError') return ExitCode.USAGE;
  return ExitCode.INTERNAL;
}
