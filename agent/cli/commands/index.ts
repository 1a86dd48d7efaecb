import type { Command } from '../command.js';
import { checkConfigCommand } from './check-config.js';
import { conditionCommand } from './condition.js';

/** Every sub-command, in the order `turnwise help` lists them. */
export const commands: readonly Command[] = [checkConfigCommand, conditionCommand];
