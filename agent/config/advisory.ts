import { z } from 'zod';
import { gpioLine } from './gpio.js';

/**
 * The `advisory` section: the local safe-stop advisory (a relay and a lamp, energised while all is
 * well). An advisory to people, not a protective trip. Optional: without it no GPIO is touched.
 */

const output = z
  .object({
    line: gpioLine,
    active_low: z
      .boolean()
      .default(false)
      .describe('True when the driver energises the relay/lamp with a low level.'),
  })
  .strict();

export const advisorySchema = z
  .object({
    relay: output.optional().describe('Relay output, energised while no advisory is active.'),
    lamp: output.optional().describe('Lamp output, lit while no advisory is active.'),
    ack_button: z
      .object({
        line: gpioLine,
        active_low: z
          .boolean()
          .default(true)
          .describe('True for a button that pulls the line low when pressed.'),
        debounce_ms: z.number().int().min(0).max(2000).default(50),
      })
      .strict()
      .optional()
      .describe('Local acknowledge push-button.'),
    zone: z
      .enum(['C', 'D'])
      .default('D')
      .describe('ISO 20816-3 zone at or above which a channel votes for the advisory.'),
    min_channels: z
      .number()
      .int()
      .min(1)
      .max(8)
      .default(2)
      .describe(
        'OK channels of one bearing that must vote at the same time (2 = two-channel agreement).',
      ),
    hold_s: z
      .number()
      .min(0)
      .max(600)
      .default(3)
      .describe(
        'The vote must hold this long before the advisory is ' +
          'raised, and be gone this long before it clears, s.',
      ),
    sensors: z
      .array(z.string().min(1))
      .min(1)
      .optional()
      .describe('Sensor ids allowed to vote (default: every sensor).'),
    stall_s: z
      .number()
      .min(0)
      .max(3600)
      .default(60)
      .describe(
        'Drop the outputs when no measurement has reached ' +
          'the advisory for this long, s (0 = never).',
      ),
  })
  .strict()
  .refine((a) => a.relay || a.lamp, {
    message: 'give advisory.relay, advisory.lamp or both',
    path: ['relay'],
  });

export type AdvisoryConfig = z.infer<typeof advisorySchema>;
