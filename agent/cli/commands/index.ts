import type { Command } from '../command.js';
import { analyzeCommand } from './analyze.js';
import { checkConfigCommand } from './check-config.js';
import { mqttCommand } from './mqtt.js';

/** Every sub-command, in the order `turnwise help` lists them. */
export const commands: readonly Command[] = [analyzeCommand, checkConfigCommand, mqttCommand];
