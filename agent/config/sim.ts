import { z } from 'zod';

/**
 * Acquisition section for the simulated fan (`driver: sim`). The simulator plays the scenario file
 * against this config's sensors and tach channel, the same channel map as a real board.
 */
export const simDriverSchema = z
  .object({
    driver: z.literal('sim'),
    scenario: z
      .string({
        error: (iss) =>
          iss.input === undefined
            ? 'driver "sim" needs scenario: the scenario file, relative ' +
              'to this config file (e.g. example-scenario.yaml)'
            : undefined,
      })
      .min(1)
      .describe(
        'Scenario file (YAML), relative to this config file; see config/example-scenario.yaml.',
      ),
    pace: z
      .enum(['realtime', 'fast'])
      .default('realtime')
      .describe(
        'realtime: blocks arrive as a board would deliver them; fast: as fast as they are taken.',
      ),
    time_scale: z
      .number()
      .positive()
      .max(1e6)
      .default(1)
      .describe(
        'Scenario seconds per second of signal: 3600 plays ' +
          'a day of the timeline in 24 s of signal.',
      ),
    from_day: z
      .number()
      .min(0)
      .max(3650)
      .default(0)
      .describe('Scenario day to start at (fractions allowed: 5.5 is day 5 at noon).'),
    block_ms: z
      .number()
      .positive()
      .max(2000)
      .default(100)
      .describe('Length of each block of samples, milliseconds.'),
    board_tach_edges: z
      .boolean()
      .default(false)
      .describe(
        'Hand out tach edge times with each block, as a board that times its tach input does.',
      ),
    seed: z
      .number()
      .int()
      .min(0)
      .max(2 ** 31 - 1)
      .optional()
      .describe('Overrides the scenario seed.'),
  })
  .strict();

export type SimDriverConfig = z.infer<typeof simDriverSchema>;
