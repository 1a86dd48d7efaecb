import type { Command } from '../command.js';
import { analyzeCommand } from './analyze.js';
import { balanceCommand } from './balance.js';
import { checkConfigCommand } from './check-config.js';
import { conditionCommand } from './condition.js';
import { demoCommand } from './demo.js';
import { eventsCommand } from './events.js';
import { liveCommand } from './live.js';
import { mqttCommand } from './mqtt.js';
import { outputsOffCommand } from './outputs-off.js';
import { probeSerialCommand } from './probe-serial.js';
import { runCommand } from './run.js';
import { simBoardCommand } from './sim-board.js';
import { simulateCommand } from './simulate.js';

/** Every sub-command, in the order `turnwise help` lists them. */
export const commands: readonly Command[] = [analyzeCommand, balanceCommand, checkConfigCommand, conditionCommand, demoCommand, eventsCommand, liveCommand, mqttCommand, outputsOffCommand, probeSerialCommand, runCommand, simBoardCommand, simulateCommand];
