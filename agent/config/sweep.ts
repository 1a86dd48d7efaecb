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
      .describe(
        'A run-up or coast-down must move the speed through at ' +
          'least this share of machine.rated_rpm (of the highest ' +
          'speed seen when rated_rpm is unset). Own choice: 0.3.',
      ),
    revolutions_per_point: z
      .number()
      .int()
      .min(1)
      .max(64)
      .default(4)
      .describe(
        'Revolutions synchronously averaged into each point of the 1x-against-speed ' +
          'curve. Own choice: 4 (more points on a fast sweep, more averaging on a slow one).',
      ),
    min_phase_shift_deg: z
      .number()
      .min(10)
      .max(170)
      .default(45)
      .describe(
        'Smallest 1x phase change across the half-power band for an amplitude ' +
          'peak to count as a resonance, degrees. Own choice: 45 (half the ' +
          '90 degrees of a single-degree-of-freedom mode, textbook).',
      ),
    reversal_share: z
      .number()
      .min(0.001)
      .max(0.2)
      .default(0.02)
      .describe(
        'A speed move against the sweep direction larger than this ' +
          'share of the reference speed ends the sweep. Own choice: 0.02.',
      ),
    steady_share: z
      .number()
      .min(0.0005)
      .max(0.05)
      .default(0.005)
      .describe(
        'Points within this share of the start (end) speed are ' +
          'steady running and trimmed off the sweep. Own choice: 0.005.',
      ),
    max_point_change_pct: z
      .number()
      .min(0.1)
      .max(10)
      .default(2)
      .describe(
        'Speed change from one point to the next, as a percentage of the reference ' +
          'speed (machine.rated_rpm, else the highest speed measured), above which the ' +
          'sweep is too fast for the averaging (a warning names the rate). Own choice: 2.',
      ),
    min_points_in_band: z
      .number()
      .int()
      .min(2)
      .max(50)
      .default(5)
      .describe(
        'A resonance with fewer points than this within its half-power ' +
          'band gets a warning that its peak and amplification factor ' +
          'are doubtful (the sweep passed it too fast). Own choice: 5.',
      ),
    record: z
      .boolean()
      .default(true)
      .describe(
        'turnwise run records every run-up and coast-down under ' +
          'state_dir/sweeps and publishes sweep_recorded. Own choice: true.',
      ),
    settle_s: z
      .number()
      .min(1)
      .max(600)
      .default(5)
      .describe(
        'In turnwise run, a sweep has ended once the speed has stayed at its final ' +
          'speed (or no trusted revolution has come) for this many seconds. Own choice: 5.',
      ),
    max_points: z
      .number()
      .int()
      .min(64)
      .max(20000)
      .default(2048)
      .describe(
        'Most points turnwise run holds while a sweep goes on (about 17 + 16 x sensors ' +
          'bytes each); a sweep still going when they are full is recorded as far as it ' +
          'got. Own choice: 2048 (8 minutes of a 1480 r/min fan at 4 revolutions per point).',
      ),
    max_count: z
      .number()
      .int()
      .min(1)
      .max(1000)
      .default(20)
      .describe(
        'Most sweeps kept under state_dir/sweeps (the reference ' +
          'sweep not counted); the oldest go first. Own choice: 20.',
      ),
    max_mb: z
      .number()
      .min(0.05)
      .max(1000)
      .default(10)
      .describe(
        'Most MiB the kept sweeps take together (the reference ' +
          'not counted); the oldest go first. Own choice: 10.',
      ),
    reference_id: z
      .string()
      .regex(/^[0-9]{8}T[0-9]{6}Z-(up|down)(-[0-9]+)?$/, 'a sweep id such as 20261203T063000Z-down')
      .optional()
      .describe(
        'The stored sweep every new sweep of its direction is compared with. ' +
          'Default: the first sweep recorded in each direction becomes the reference.',
      ),
    moved_share: z
      .number()
      .min(0.005)
      .max(0.5)
      .default(0.05)
      .describe(
        'A resonance whose speed moved by more than this share from the reference ' +
          'sweep gives a resonance_moved warning. Own choice: 0.05 (a support that lost ' +
          'a tenth of its stiffness moves its resonance about 5 %, sqrt law, textbook).',
      ),
  })
  .strict()
  .default({
    min_change_share: 0.3,
    revolutions_per_point: 4,
    min_phase_shift_deg: 45,
    reversal_share: 0.02,
    steady_share: 0.005,
    max_point_change_pct: 2,
    min_points_in_band: 5,
    record: true,
    settle_s: 5,
    max_points: 2048,
    max_count: 20,
    max_mb: 10,
    moved_share: 0.05,
  });
