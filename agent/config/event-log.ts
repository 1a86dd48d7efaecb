import { z } from 'zod';

/**
 * `event_log:` section: the agent's own record of every event under state_dir, read with `turnwise
 * events`.
 */
export const eventLogSchema = z
  .object({
    enabled: z
      .boolean()
      .default(true)
      .describe(
        "Keep every event in <state_dir>/events/ (JSON lines), so an alarm's " +
          'history survives a reboot even where the journal lives in RAM.',
      ),
    max_mb: z
      .number()
      .min(0.1)
      .max(1024)
      .default(4)
      .describe(
        'Most disk the event log uses, MiB (two files of ' +
          'half each; the oldest half is dropped when full).',
      ),
  })
  .strict()
  .default({ enabled: true, max_mb: 4 });

export type EventLogConfig = z.infer<typeof eventLogSchema>;
