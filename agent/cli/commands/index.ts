import type { Command } from '../command.js';
import { analyzeCommand } from './analyze.js';
import { balanceCommand } from './balance.js';
import { checkConfigCommand } from './check-config.js';
import { simulateCommand } from './simulate.js';

/** Every sub-command, in the order `turnwise help` lists them. */
export const commands: readonly Command[] = [analyzeCommand, balanceCommand, checkConfigCommand, simulateCommand];
