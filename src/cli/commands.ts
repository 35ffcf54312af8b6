import type { CommandModule } from 'yargs';
import { command as hintsCommand } from './commands/hints.js';
import { command as progressCommand } from './commands/progress.js';
import { command as restoreCommand } from './commands/restore.js';
import { command as scoreCommand } from './commands/score.js';
import { command as sheetCommand } from './commands/sheet.js';
import { command as trainCommand } from './commands/train.js';
import { command as trainRepairCommand } from './commands/train-repair.js';
import { command as tuneCommand } from './commands/tune.js';

/**
 * Every verb of the CLI, in the order `--help` lists them. Each module lives in
 * src/cli/commands/<verb>.ts and exports `command`.
 */
// eslint-disable-next-line @typescript-eslint/no-explicit-any
export const commands: CommandModule<any, any>[] = [
  restoreCommand,
  progressCommand,
  hintsCommand,
  tuneCommand,
  trainCommand,
  trainRepairCommand,
  scoreCommand,
  sheetCommand,
];
