import { z } from 'zod';

/**
 * The `gpio` section: which GPIO chip the line offsets refer to, and an optional once-per-turn
 * pulse on a GPIO input used as a speed cross-check. Optional: without it (and without `advisory`)
 * no GPIO is touched.
 */

export const gpioLine = z
  .number()
  .int()
  .min(0)
  .max(1023)
  .describe('Chip-relative GPIO line offset (the adapter adds the chip base).');

export const gpioTachSpeedSchema = z
  .object({
    line: gpioLine,
    active_low: z
      .boolean()
      .default(false)
      .describe('True when the pickup pulls the line low while the mark passes.'),
    pulses_per_rev: z
      .number()
      .int()
      .min(1)
      .max(64)
      .default(1)
      .describe(
        'Pulses per revolution on this input (its own pickup; independent of tach.pulses_per_rev).',
      ),
    average_revs: z
      .number()
      .int()
      .min(1)
      .max(64)
      .default(4)
      .describe(
        'Revolutions averaged for the GPIO speed. Only the end ' +
          'edges of the span count: 1 ms of timestamp jitter at each ' +
          'end over 4 turns at 1480 r/min is at most 1.2 % of speed.',
      ),
    min_rpm: z
      .number()
      .positive()
      .optional()
      .describe(
        'Slower pulses mean a stopped shaft or lost pulses: the ' +
          'GPIO speed becomes unknown, r/min. Default: tach.min_rpm.',
      ),
    max_rpm: z
      .number()
      .positive()
      .optional()
      .describe('Faster pulses are double triggers and are ignored, r/min. Default: tach.max_rpm.'),
    tolerance_pct: z
      .number()
      .positive()
      .max(50)
      .default(5)
      .describe(
        'Warn when the GPIO speed lies further than this outside the range of ' +
          'revolution speeds the tach channel measured in the window, % (the ' +
          'default is about 4 times the 1.2 % timing bound of 4 averaged turns).',
      ),
  })
  .strict()
  .refine((t) => t.min_rpm === undefined || t.max_rpm === undefined || t.min_rpm < t.max_rpm, {
    message: 'min_rpm must be below max_rpm',
    path: ['min_rpm'],
  });

export const gpioSchema = z
  .object({
    chip_label: z
      .string()
      .min(1)
      .max(64)
      .optional()
      .describe(
        'Label of the GPIO chip that advisory.* and gpio.tach_speed line offsets ' +
          'refer to, as in /sys/class/gpio/gpiochip*/label (e.g. "pinctrl-bcm2711"). ' +
          'Needed on a board with several chips and no Raspberry Pi header chip.',
      ),
    tach_speed: gpioTachSpeedSchema
      .optional()
      .describe(
        'A once-per-turn pulse on a GPIO input, for a speed cross-check ' +
          'against the tach channel. Speed only, never phase: user-space ' +
          'GPIO timestamps jitter by about a millisecond.',
      ),
  })
  .strict();

export type GpioConfig = z.infer<typeof gpioSchema>;
export type GpioTachSpeedConfig = z.infer<typeof gpioTachSpeedSchema>;
