import { z } from 'zod';

/**
 * `sweep:` section: how run-ups and coast-downs are found and read (`turnwise sweep`). The
 * defaults are the project's own choices (stated below), not a standard's.
 */
export const sweepSchema = z
  .object({
    min_change_share: z
      .number()
      .min(0.05)
      .max(1)
      .default(0.3)
      .describe('A run-up or coast-down must move the speed through at least this share of machine.rated_rpm (of the highest speed seen when rated_rpm is unset). Own choice: 0.3.'),
    revolutions_per_point: z
      .number()
      .int()
      .min(1)
      .max(64)
      .default(4)
      .describe('Revolutions synchronously averaged into each point of the 1x-against-speed curve. Own choice: 4 (more points on a fast sweep, more averaging on a slow one).'),
    min_phase_shift_deg: z
      .number()
      .min(10)
      .max(170)
      .default(45)
      .describe('Smallest 1x phase change across the half-power band for an amplitude peak to count as a resonance, degrees. Own choice: 45 (half the 90 degrees of a single-degree-of-freedom mode, textbook).'),
    reversal_share: z
      .number()
      .min(0.001)
      .max(0.2)
      .default(0.02)
      .describe('A speed move against the sweep direction larger than this share of the reference speed ends the sweep. Own choice: 0.02.'),
    steady_share: z
      .number()
      .min(0.0005)
      .max(0.05)
      .default(0.005)
      .describe('Points within this share of the start (end) speed are steady running and trimmed off the sweep. Own choice: 0.005.'),
    max_point_change_pct: z
      .number()
      .min(0.1)
      .max(10)
      .default(2)
      .describe('Speed change from one point to the next above which the sweep is too fast for the averaging (a warning names the rate), percent. Own choice: 2.'),
  })
  .strict()
  .default({ min_change_share: 0.3, revolutions_per_point: 4, min_phase_shift_deg: 45, reversal_share: 0.02, steady_share: 0.005, max_point_change_pct: 2 });
