import { z } from 'zod';
import { simDriverSchema } from './sim.js';

/**
 * `acquisition`: where the samples come from. One of three drivers, told apart by `driver`; each
 * accepts only its own keys, so a key meant for another driver is reported as unknown.
 */

/**
 * A required key whose absence gets a message saying which driver needs it and what to put there.
 */
function needs(driver: string, key: string, what: string) {
  return {
    error: (iss: { input?: unknown }) =>
      iss.input === undefined ? `driver "${driver}" needs ${key}: ${what}` : undefined,
  };
}

export const wavDriverSchema = z
  .object({
    driver: z.literal('wav'),
    file: z
      .string(needs('wav', 'file', 'the path of the recording, relative to this config file'))
      .min(1)
      .describe('Recording (RIFF/WAVE), relative to this config file.'),
    realtime: z
      .boolean()
      .default(false)
      .describe(
        "Deliver samples at the recording's sample rate " +
          '(true), or as fast as they can be processed (false).',
      ),
    pcm_full_scale_v: z
      .number()
      .positive()
      .max(1000)
      .default(10)
      .describe(
        'Volts at integer full scale for PCM recordings (the usual +/-10 V ' +
          'input range of acquisition boards); float recordings are volts already.',
      ),
  })
  .strict();

export const serialDriverSchema = z
  .object({
    driver: z.literal('serial'),
    device: z
      .string(needs('serial', 'device', 'e.g. /dev/serial/by-id/usb-...'))
      .min(1)
      .describe(
        'Device path. Use the stable /dev/serial/by-id/usb-... link ' +
          '(survives re-plugging and other USB devices), not /dev/ttyACM0.',
      ),
    baud: z
      .number()
      .int()
      .min(300)
      .max(16_000_000)
      .default(921_600)
      .describe(
        'Line rate, bits/s. USB CDC boards ignore it; a UART needs about 10 bits ' +
          'per byte of frame (8 channels x 25.6 kHz x int24 is about 6.3 Mbit/s).',
      ),
    sample_rate_hz: z
      .number(needs('serial', 'sample_rate_hz', "the board's sample rate"))
      .positive()
      .max(1_000_000)
      .describe(
        "The board's sample rate, Hz. Frames declaring a rate further " +
          'from it than sample_rate_tolerance_ppm are rejected and counted.',
      ),
    sample_rate_tolerance_ppm: z
      .number()
      .min(0)
      .max(10_000)
      .default(100)
      .describe(
        'How far the rate a frame declares may be from sample_rate_hz, ppm (100 ' +
          'ppm = 0.01 %). Within it the DSP uses sample_rate_hz (a 100 ppm error ' +
          'is a 0.01 % speed error, no phase error: the tach is on the same clock).',
      ),
    channels: z
      .number(needs('serial', 'channels', 'how many channels the board sends'))
      .int()
      .min(1)
      .max(64)
      .describe(
        'Channels in every frame. Frames with another count are rejected and counted; every ' +
          'sensor channel (and the tach channel, unless board_tach_edges) must be below it.',
      ),
    board_tach_edges: z
      .boolean()
      .default(false)
      .describe(
        'The board times the tach itself and sends the edges in its frames; the ' +
          'tach then need not be one of its channels (tach.channel is not used).',
      ),
    reconnect_min_ms: z
      .number()
      .int()
      .min(50)
      .max(60_000)
      .default(500)
      .describe(
        'First wait before reopening a device that failed ' +
          'or went away, ms; doubles up to reconnect_max_ms.',
      ),
    reconnect_max_ms: z
      .number()
      .int()
      .min(100)
      .max(600_000)
      .default(10_000)
      .describe('Longest wait between reopen attempts, ms.'),
    stall_timeout_ms: z
      .number()
      .int()
      .min(500)
      .max(600_000)
      .default(5_000)
      .describe(
        'An open device that delivers no good frame for this long is closed and reopened, ms.',
      ),
    queue_frames: z
      .number()
      .int()
      .min(4)
      .max(100_000)
      .default(256)
      .describe(
        'Frames held for the DSP when it falls behind; beyond ' +
          'that frames are dropped and reported as a gap.',
      ),
    max_frame_bytes: z
      .number()
      .int()
      .min(1024)
      .max(16_777_216)
      .default(262_144)
      .describe('Longest frame accepted, bytes; longer length fields count as bad lengths.'),
    max_samples_per_channel: z
      .number()
      .int()
      .min(1)
      .max(65_535)
      .default(8192)
      .describe(
        'Most samples per channel one frame may carry; frames with more ' +
          'count as bad lengths (the frame must also fit max_frame_bytes).',
      ),
    clock_step_tolerance_ms: z
      .number()
      .min(50)
      .max(3_600_000)
      .default(1000)
      .describe(
        'A frame arriving this much earlier than its time on the sample clock (or ' +
          'later, for a whole second of samples) is a step of the wall clock (NTP, manual ' +
          'setting): times are anchored again, the step counted and logged once, ms.',
      ),
  })
  .strict()
  .superRefine((a, ctx) => {
    if (a.reconnect_min_ms > a.reconnect_max_ms)
      ctx.addIssue({
        code: 'custom',
        path: ['reconnect_min_ms'],
        message: 'reconnect_min_ms must not exceed reconnect_max_ms',
      });
  });

export const ACQUISITION_DRIVERS = ['wav', 'serial', 'sim'] as const;

export const acquisitionSchema = z.discriminatedUnion(
  'driver',
  [wavDriverSchema, serialDriverSchema, simDriverSchema],
  {
    error: (iss) =>
      iss.code === 'invalid_union' &&
      (iss as { note?: string }).note === 'No matching discriminator'
        ? `driver must be one of ${ACQUISITION_DRIVERS.join(', ')} (wav: a recording; ` +
          `serial: the acquisition board on a serial port; sim: the built-in fan simulator)`
        : undefined,
  },
);

export type AcquisitionConfig = z.infer<typeof acquisitionSchema>;
export type WavDriverConfig = z.infer<typeof wavDriverSchema>;
export type SerialDriverConfig = z.infer<typeof serialDriverSchema>;

interface ChannelMap {
  readonly tach: { readonly channel: number };
  readonly sensors: readonly { readonly id: string; readonly channel: number }[];
  readonly acquisition?: AcquisitionConfig;
}

type IssueSink = (path: (string | number)[], message: string) => void;

/**
 * Cross-checks the channel map against the serial board's channel count (the simulator makes the
 * channels the config names, and a recording's count is only known when it is opened).
 */
export function checkAcquisitionChannels(cfg: ChannelMap, issue: IssueSink): void {
  const a = cfg.acquisition;
  if (a?.driver !== 'serial') return;
  const range = a.channels === 1 ? 'channel 0' : `channels 0-${a.channels - 1}`;
  cfg.sensors.forEach((s, i) => {
    if (s.channel >= a.channels) {
      issue(
        ['sensors', i, 'channel'],
        `sensor ${s.id} is on channel ${s.channel} but acquisition.channels is ` +
          `${a.channels} (the board sends ${range}); set the sensor's channel to the board ` +
          `input it is wired to, or acquisition.channels to the board's channel count`,
      );
    }
  });
  if (!a.board_tach_edges && cfg.tach.channel >= a.channels) {
    issue(
      ['tach', 'channel'],
      `the tach is on channel ${cfg.tach.channel} but acquisition.channels ` +
        `is ${a.channels} (the board sends ${range}); set tach.channel to the ` +
        `input carrying the once-per-turn pulse, or ` +
        `acquisition.board_tach_edges: true if the board times the tach itself`,
    );
  }
}
