import type { CommandModule } from 'yargs';
import { command as restoreCommand } from './commands/restore.js';

/**
 * Every verb of the CLI, in the order `--help` lists them. Each module lives in
 * src/cli/commands/<verb>.ts and exports `command`.
 */
// eslint-disable-next-line @typescript-eslint/no-explicit-any
export const commands: CommandModule<any, any>[] = [restoreCommand];
