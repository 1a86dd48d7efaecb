import { z } from 'zod';
import { formatIssues } from '../config/load.js';
import type { WindowResult } from '../dsp/types.js';
import { UserError } from '../errors.js';
import { parseJsonFile, readTextOrNull } from './files.js';

/**
 * Reads DSP windows saved as JSON (for learning a baseline from a recording): one WindowResult, a
 * list of them, or an object holding them under "windows" or "window" (e.g. the output of an
 * analysis).
 */

const orderSchema = z.object({
  order: z.number(),
  freq_hz: z.number(),
  amp_pk_mm_s: z.number().min(0),
  amp_rms_mm_s: z.number().min(0),
  phase_deg: z.number(),
});
/** agent/dsp/signal-facts.ts (absent in windows written before it existed). */
const pileSchema = z.object({ v: z.number(), samples: z.number().int(), below: z.number().int() });
const signalSchema = z.object({
  crest_factor: z.number(),
  kurtosis: z.number(),
  min_step_v: z.number().nullable(),
  steps_spanned: z.number().nullable(),
  span_s: z.number(),
  span_rms_median_v: z.number(),
  impulses: z.number().int(),
  impulses_one_sided: z.number().int(),
  peak_over_level: z.number(),
  group_s: z.number(),
  groups: z.number().int(),
  group_rms_median_v: z.number(),
  group_rms_max_v: z.number(),
  group_rms_min_v: z.number(),
  group_jump_ratio: z.number(),
  pile_high: pileSchema,
  pile_low: pileSchema,
});
const channelSchema = z.object({
  id: z.string(),
  channel: z.number().int(),
  bearing: z.string(),
  direction: z.enum(['vertical', 'horizontal', 'axial']),
  mounting_angle_deg: z.number(),
  overall_rms_mm_s: z.number().nullable(),
  orders: z.record(z.string(), orderSchema),
  one_x_share: z.number().nullable(),
  nonsync_peaks: z.array(
    z.object({ freq_hz: z.number(), order: z.number(), amp_rms_mm_s: z.number() }),
  ),
  stats: z.object({
    dc_v: z.number(),
    ac_rms_v: z.number(),
    min_v: z.number(),
    max_v: z.number(),
    clipped_samples: z.number().int(),
    samples: z.number().int(),
    signal: signalSchema.optional(),
  }),
});
export const windowResultSchema: z.ZodType<WindowResult> = z.object({
  start_index: z.number(),
  end_index: z.number(),
  sample_rate_hz: z.number().positive(),
  speed_rpm: z.number().nullable(),
  speed_min_rpm: z.number().nullable(),
  speed_max_rpm: z.number().nullable(),
  revolutions: z.number().int(),
  revolutions_rejected: z.number().int(),
  band_hz: z.object({ low: z.number(), high: z.number() }),
  spectrum_segments: z.number().int(),
  spectrum_resolution_hz: z.number(),
  gap_samples: z.number().int(),
  tach: z.object({
    edges: z.number().int(),
    missing_pulses: z.number().int(),
    double_triggers: z.number().int(),
    min_v: z.number().nullable(),
    max_v: z.number().nullable(),
  }),
  channels: z.array(channelSchema),
  warnings: z.array(z.string()),
});

export function readWindowsFile(file: string): WindowResult[] {
  const text = readTextOrNull(file);
  if (text === null)
    throw new UserError(
      file,
      'file not found',
      'give a JSON file of DSP windows (one window, a list, or an object with "windows")',
    );
  const raw = parseJsonFile(file, text);
  const obj = raw as Record<string, unknown> | null;
  const list: unknown = Array.isArray(raw)
    ? raw
    : obj && typeof obj === 'object' && 'windows' in obj
      ? obj['windows']
      : obj && typeof obj === 'object' && 'window' in obj
        ? [obj['window']]
        : [raw];
  const res = z.array(windowResultSchema).min(1).safeParse(list);
  if (!res.success) {
    throw new UserError(
      file,
      `not DSP windows:\n  ${formatIssues(file, res.error.issues, list).slice(0, 8).join('\n  ')}`,
      'give the JSON the DSP wrote for the recording (WindowResult fields)',
    );
  }
  return res.data;
}
