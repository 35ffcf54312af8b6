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
  /** `restore` finished every scan, but some hints were not used (a malformed or unreadable hints file, a missing --hints folder). */
  HINTS_NOT_USED: 4,
  /** Stopped with Ctrl-C (or SIGTERM, SIGHUP): finished files are complete, the next run goes on from there (128 + SIGINT). */
  INTERRUPTED: 130,
} as const;

/** The exit code for an error that stopped a whole command. An output refused because it is an input stops it before anything is written. */
export function exitCodeFor(error: unknown): number {
  if (isKinhueError(error))
    return error.code === ErrorCodes.USAGE || error.code === ErrorCodes.OUTPUT_ON_INPUT ? ExitCode.USAGE : ExitCode.SOME_FAILED;
  if (error instanceof Error && error.name === 'YError') return ExitCode.USAGE;
  return ExitCode.INTERNAL;
}
