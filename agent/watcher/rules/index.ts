import { axial } from './axial.js';
import { bearingPhase } from './bearing-phase.js';
import { harmonics } from './harmonics.js';
import { hvShape } from './hv-shape.js';
import { oneXShare } from './one-x-share.js';
import { oneXSize } from './one-x-size.js';
import { phaseStabilityRule } from './phase-stability.js';
import { sensorFaults } from './sensor-faults.js';
import { significance } from './significance.js';
import { sweepResonance } from './sweep-resonance.js';
import type { WatcherRule } from './types.js';

/**
 * The watcher's 1x rules, in the order they run. A rule may read the facts of the rules before it
 * (axial reads harmonics' two_x_high); a rule that states `stop` ends the list (kind "none").
 * To add one: a file here exporting a WatcherRule, a line in this list, its thresholds as keys of
 * watcher.unbalance in agent/config/watcher.ts (DEVELOPERS.md, "How to add a watcher rule").
 */
export const RULES: readonly WatcherRule[] = [
  sensorFaults,
  oneXSize,
  oneXShare,
  harmonics,
  hvShape,
  bearingPhase,
  axial,
  phaseStabilityRule,
  sweepResonance,
  significance,
];

export * from './types.js';
