import { z } from 'zod';

/**
 * `capture:` section: raw signal kept around every alarm (and on command), for the analyst who
 * looks at the event the next morning. The defaults are the project's own choices.
 */
export const captureSchema = z
  .object({
    enabled: z
      .boolean()
      .default(true)
      .describe(
        'Write a capture for every event of severity alarm and for the capture.take command.',
      ),
    pre_s: z
      .number()
      .min(0)
      .max(60)
      .default(5)
      .describe(
        'Seconds of raw samples kept from before the event (held in memory, all channels).',
      ),
    post_s: z
      .number()
      .min(0)
      .max(60)
      .default(5)
      .describe('Seconds of raw samples recorded after the event.'),
    max_count: z
      .number()
      .int()
      .min(1)
      .max(1000)
      .default(20)
      .describe('Most captures kept under state_dir/captures; the oldest are removed first.'),
    max_mb: z
      .number()
      .min(0.1)
      .max(100000)
      .default(200)
      .describe(
        'Most megabytes (MiB) the captures may take together; the oldest are removed first.',
      ),
  })
  .strict()
  .refine((c) => c.pre_s + c.post_s > 0, {
    message: 'pre_s + post_s must be above 0 s',
    path: ['post_s'],
  })
  .default({ enabled: true, pre_s: 5, post_s: 5, max_count: 20, max_mb: 200 });
