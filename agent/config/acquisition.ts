import { z } from 'zod';

/**
 * `acquisition`: where the samples come from. `driver`, `file` and `realtime` keep the meanings the
 * `run` command relies on; the other keys are the serial board's.
 */
export const acquisitionSchema = z
  .object({
    driver: z.enum(['wav', 'serial', 'sim']).describe('wav: a recording; serial: the acquisition board on a serial (USB CDC) port; sim: the built-in fan simulator.'),
    file: z.string().min(1).optional().describe('wav: path of the recording to read.'),
    realtime: z
      .boolean()
      .default(false)
      .describe('wav and sim: deliver samples at the sample rate (true) or as fast as they can be processed (false). The serial board is always real time.'),
    device: z
      .string()
      .min(1)
      .optional()
      .describe('serial: device path. Use the stable /dev/serial/by-id/usb-... link (survives re-plugging and other USB devices), not /dev/ttyACM0.'),
    baud: z
      .number()
      .int()
      .min(300)
      .max(16_000_000)
      .default(921_600)
      .describe('serial: line rate, bits/s. USB CDC boards ignore it; a UART needs about 10 bits per byte of frame (8 channels x 25.6 kHz x int24 is about 6.3 Mbit/s).'),
    sample_rate_hz: z.number().positive().max(1_000_000).optional().describe('serial: the board\'s sample rate, Hz. Frames with another rate are rejected and counted.'),
    channels: z.number().int().min(1).max(64).optional().describe('serial: channels in every frame. Frames with another count are rejected and counted.'),
    reconnect_min_ms: z.number().int().min(50).max(60_000).default(500).describe('serial: first wait before reopening a device that failed or went away, ms; doubles up to reconnect_max_ms.'),
    reconnect_max_ms: z.number().int().min(100).max(600_000).default(10_000).describe('serial: longest wait between reopen attempts, ms.'),
    stall_timeout_ms: z
      .number()
      .int()
      .min(500)
      .max(600_000)
      .default(5_000)
      .describe('serial: an open device that delivers no good frame for this long is closed and reopened, ms.'),
    queue_frames: z
      .number()
      .int()
      .min(4)
      .max(100_000)
      .default(256)
      .describe('serial: frames held for the DSP when it falls behind; beyond that frames are dropped and reported as a gap.'),
    max_frame_bytes: z.number().int().min(1024).max(16_777_216).default(262_144).describe('serial: longest frame accepted, bytes; longer length fields count as bad lengths.'),
  })
  .strict()
  .superRefine((a, ctx) => {
    if (a.driver === 'wav' && !a.file) ctx.addIssue({ code: 'custom', path: ['file'], message: 'driver "wav" needs file: the path of the recording' });
    if (a.driver === 'serial') {
      if (!a.device) ctx.addIssue({ code: 'custom', path: ['device'], message: 'driver "serial" needs device: e.g. /dev/serial/by-id/usb-...' });
      if (a.sample_rate_hz === undefined) ctx.addIssue({ code: 'custom', path: ['sample_rate_hz'], message: 'driver "serial" needs sample_rate_hz: the board\'s sample rate' });
      if (a.channels === undefined) ctx.addIssue({ code: 'custom', path: ['channels'], message: 'driver "serial" needs channels: how many channels the board sends' });
    }
    if (a.reconnect_min_ms > a.reconnect_max_ms) ctx.addIssue({ code: 'custom', path: ['reconnect_min_ms'], message: 'reconnect_min_ms must not exceed reconnect_max_ms' });
  });

export type AcquisitionConfig = z.infer<typeof acquisitionSchema>;
