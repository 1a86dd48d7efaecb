import { z } from 'zod';
import { eventLogSchema } from './event-log.js';
import { acquisitionSchema, checkAcquisitionChannels } from './acquisition.js';
import { advisorySchema } from './advisory.js';
import { balanceSchema } from './balance.js';
import { captureSchema } from './capture.js';
import { gpioSchema } from './gpio.js';
import { liveSchema } from './live.js';
import { loggingSchema } from './logging.js';
import { mqttSchema } from './mqtt.js';
import { sweepSchema } from './sweep.js';
import { watcherSchema } from './watcher.js';

/**
 * The one configuration schema. Every key a user can write lives here, with its meaning.
 * Sections owned by later stages (acquisition, mqtt, watcher, advisory, live view) sit in their
 * own files beside this one and are composed below.
 */

const assetId = z
  .string()
  .regex(
    /^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$/,
    'letters, digits, "_", "." or "-" (no "/", "+", "#" or spaces), at most 64 characters',
  );

export const machineSchema = z
  .object({
    id: assetId.describe('Asset id, used in events and MQTT topics.'),
    name: z.string().optional().describe('Free-text name shown to people.'),
    group: z
      .literal([1, 2])
      .describe('ISO 20816-3 machine group: 1 (over 300 kW) or 2 (15-300 kW).'),
    support: z.enum(['rigid', 'flexible']).describe('ISO 20816-3 support class.'),
    rated_rpm: z
      .number()
      .positive()
      .max(60000)
      .optional()
      .describe('Rated running speed, r/min. Sets the spectrum resolution and the speed checks.'),
    blades: z
      .number()
      .int()
      .min(2)
      .max(64)
      .optional()
      .describe('Impeller blade count; adds the blade-pass order to the order vectors.'),
    rotor: z
      .enum(['centre_hung', 'overhung'])
      .default('centre_hung')
      .describe('Impeller between the bearings, or outboard of both.'),
  })
  .strict();

export const tachSchema = z
  .object({
    channel: z
      .number()
      .int()
      .min(0)
      .max(63)
      .describe('0-based acquisition channel carrying the once-per-turn pulse (volts).'),
    pulses_per_rev: z.number().int().min(1).max(512).default(1),
    trigger_v: z.number().describe('Rising-edge threshold, volts.'),
    hysteresis_v: z
      .number()
      .positive()
      .optional()
      .describe(
        'The signal must fall this far below trigger_v before the next ' +
          'edge counts. Default: 10 % of |trigger_v|, at least 0.05 V.',
      ),
    min_rpm: z
      .number()
      .positive()
      .default(30)
      .describe('Slowest speed the tach may report, r/min; slower pulses count as missing.'),
    max_rpm: z
      .number()
      .positive()
      .default(6000)
      .describe('Fastest plausible speed, r/min; faster pulses are treated as double triggers.'),
  })
  .strict()
  .refine((t) => t.min_rpm < t.max_rpm, {
    message: 'min_rpm must be below max_rpm',
    path: ['min_rpm'],
  });

export const sensorSchema = z
  .object({
    id: z
      .string()
      .regex(
        /^[A-Za-z0-9][A-Za-z0-9_.-]{0,31}$/,
        'letters, digits, "_", "." or "-", at most 32 characters',
      ),
    channel: z.number().int().min(0).max(63).describe('0-based acquisition channel, volts.'),
    bearing: z
      .string()
      .min(1)
      .max(32)
      .describe('Bearing name, e.g. DE (drive end) or NDE (non-drive end).'),
    direction: z.enum(['vertical', 'horizontal', 'axial']),
    sensitivity_mv_per_g: z
      .number()
      .positive()
      .max(100000)
      .describe('Accelerometer sensitivity, mV per g (g = 9.80665 m/s^2).'),
    mounting_angle_deg: z
      .number()
      .min(-360)
      .max(360)
      .default(0)
      .describe(
        'Extra angle of this sensor relative to the reference ' +
          'position of its direction; 180 for a sensor on the opposite ' +
          'side. Subtracted from its phase before comparisons.',
      ),
    bias_v: z
      .object({ min: z.number(), max: z.number() })
      .strict()
      .optional()
      .describe(
        'Healthy DC bias window in volts for DC-coupled IEPE inputs ' +
          '(common practice: 8-12 V). Omit for AC-coupled boards.',
      ),
    full_scale_v: z
      .number()
      .positive()
      .optional()
      .describe('Input range of the channel, volts; samples at or beyond it count as clipped.'),
  })
  .strict();

export const dspSchema = z
  .object({
    resample_points: z
      .number()
      .int()
      .min(32)
      .max(4096)
      .default(256)
      .describe(
        'Angle bins per revolution for synchronous averaging; ' +
          'each bin holds the mean of the signal over it.',
      ),
    orders: z
      .array(z.number().int().min(1).max(100))
      .min(1)
      .default([1, 2, 3])
      .describe(
        'Orders whose vectors are reported (the blade-pass ' +
          'order is added when machine.blades is set).',
      ),
    spectrum_resolution_hz: z
      .number()
      .positive()
      .max(10)
      .optional()
      .describe(
        'Target line spacing of the averaged spectrum, Hz. ' +
          'Default 1 Hz, or 0.25 Hz when rated_rpm is below 600.',
      ),
    band_hz: z
      .object({ low: z.number().positive(), high: z.number().positive() })
      .strict()
      .optional()
      .describe(
        'Overrides the ISO 20816-3 band for the overall r.m.s. ' +
          '(default 10-1000 Hz, 2-1000 Hz below 600 r/min).',
      ),
  })
  .strict()
  .default({ resample_points: 256, orders: [1, 2, 3] });

export const configSchema = z
  .object({
    machine: machineSchema,
    units: z
      .enum(['mm/s', 'in/s'])
      .default('mm/s')
      .describe(
        'Units for tables and the live page; JSON always uses the units its field names carry.',
      ),
    tach: tachSchema,
    sensors: z.array(sensorSchema).min(1),
    dsp: dspSchema,
    acquisition: acquisitionSchema
      .optional()
      .describe('Where the samples come from (recording, serial board, simulator).'),
    state_dir: z
      .string()
      .min(1)
      .default('./state')
      .describe('Where history, the outbox and balancing jobs are kept.'),
    balance: balanceSchema,
    capture: captureSchema.describe(
      'Raw signal kept around every alarm and on command (state_dir/captures).',
    ),
    sweep: sweepSchema.describe('How run-ups and coast-downs are found and read (turnwise sweep).'),

    watcher: watcherSchema,

    mqtt: mqttSchema
      .optional()
      .describe('Plant broker connection; without it nothing is published.'),
    advisory: advisorySchema
      .optional()
      .describe(
        'Local safe-stop advisory (relay and lamp); without ' +
          'it (and without gpio.tach_speed) no GPIO is used.',
      ),
    gpio: gpioSchema
      .optional()
      .describe('GPIO chip choice and the optional GPIO tach input (speed cross-check only).'),
    live: liveSchema
      .optional()
      .describe(
        'Live page and balancing workbench for the technician ' +
          '(HTTP + WebSocket); without it no port is opened.',
      ),

    logging: loggingSchema,
    event_log: eventLogSchema,
  })
  .strict()
  .superRefine((cfg, ctx) => {
    const ids = new Map<string, number>();
    const channels = new Map<number, number>();
    cfg.sensors.forEach((s, i) => {
      const prevId = ids.get(s.id);
      if (prevId !== undefined) {
        ctx.addIssue({
          code: 'custom',
          path: ['sensors', i, 'id'],
          message: `sensor id "${s.id}" is already used by sensors[${prevId}]; ids must be unique`,
        });
      } else ids.set(s.id, i);
      const prevCh = channels.get(s.channel);
      if (prevCh !== undefined) {
        ctx.addIssue({
          code: 'custom',
          path: ['sensors', i, 'channel'],
          message: `channel ${s.channel} is already used by sensors[${prevCh}]`,
        });
      } else channels.set(s.channel, i);
      if (s.channel === cfg.tach.channel) {
        ctx.addIssue({
          code: 'custom',
          path: ['sensors', i, 'channel'],
          message: `channel ${s.channel} is the tach channel (tach.channel)`,
        });
      }
      if (s.bias_v && s.bias_v.min >= s.bias_v.max) {
        ctx.addIssue({
          code: 'custom',
          path: ['sensors', i, 'bias_v', 'min'],
          message: 'bias_v.min must be below bias_v.max',
        });
      }
    });
    checkAcquisitionChannels(cfg, (path, message) =>
      ctx.addIssue({ code: 'custom', path, message }),
    );
    checkGpioLines(cfg, (path, message) => ctx.addIssue({ code: 'custom', path, message }));
    const gt = cfg.gpio?.tach_speed;
    if (gt && (gt.min_rpm ?? cfg.tach.min_rpm) >= (gt.max_rpm ?? cfg.tach.max_rpm)) {
      ctx.addIssue({
        code: 'custom',
        path: ['gpio', 'tach_speed', gt.min_rpm === undefined ? 'max_rpm' : 'min_rpm'],
        message:
          `min_rpm ${gt.min_rpm ?? cfg.tach.min_rpm} must be below max_rpm ` +
          `${gt.max_rpm ?? cfg.tach.max_rpm} (an unset one is taken from the tach section)`,
      });
    }
    if (cfg.dsp.band_hz && cfg.dsp.band_hz.low >= cfg.dsp.band_hz.high) {
      ctx.addIssue({
        code: 'custom',
        path: ['dsp', 'band_hz', 'low'],
        message: 'band_hz.low must be below band_hz.high',
      });
    }
  });

/** Every GPIO line offset is used once (all offsets refer to the same chip, gpio.chip_label). */
function checkGpioLines(
  cfg: {
    advisory?: { relay?: { line: number }; lamp?: { line: number }; ack_button?: { line: number } };
    gpio?: { tach_speed?: { line: number } };
  },
  issue: (path: (string | number)[], message: string) => void,
): void {
  const uses: [string[], number | undefined][] = [
    [['advisory', 'relay', 'line'], cfg.advisory?.relay?.line],
    [['advisory', 'lamp', 'line'], cfg.advisory?.lamp?.line],
    [['advisory', 'ack_button', 'line'], cfg.advisory?.ack_button?.line],
    [['gpio', 'tach_speed', 'line'], cfg.gpio?.tach_speed?.line],
  ];
  const seen = new Map<number, string>();
  for (const [path, line] of uses) {
    if (line === undefined) continue;
    const prev = seen.get(line);
    if (prev !== undefined)
      issue(path, `line ${line} is already used by ${prev}; each GPIO line can serve one purpose`);
    else seen.set(line, path.join('.'));
  }
}

export type Config = z.infer<typeof configSchema>;
export type SensorConfig = Config['sensors'][number];
export type TachConfig = Config['tach'];
