import type { SensorConfig } from '../config/schema.js';
import type { LiveFrame, OrderVector, WindowResult } from '../dsp/types.js';
import { SCHEMA_IDS, type LivePayload } from './payloads.js';

/** The watcher's verdict on one channel, when it has one. */
export interface ChannelVerdict {
  readonly zone: 'A' | 'B' | 'C' | 'D' | null;
  readonly ok: boolean | null;
}
type Verdicts = (sensorId: string) => ChannelVerdict | undefined;

function channelEntry(
  id: string,
  bearing: string,
  direction: SensorConfig['direction'],
  overall: number | null,
  x1: OrderVector | undefined,
  verdict: Verdicts | undefined,
): LivePayload['channels'][number] {
  const v = verdict?.(id);
  return {
    id,
    bearing,
    direction,
    overall_rms_mm_s: overall,
    one_x_amp_pk_mm_s: x1 ? x1.amp_pk_mm_s : null,
    one_x_phase_deg: x1 ? x1.phase_deg : null,
    zone: v?.zone ?? null,
    ok: v?.ok ?? null,
  };
}

/** The live message (overall level and 1x vector per channel) from one analysis window. */
export function livePayloadFromWindow(
  w: WindowResult,
  asset: string,
  ts: string,
  verdict?: Verdicts,
): LivePayload {
  return {
    schema: SCHEMA_IDS.live,
    asset,
    ts,
    speed_rpm: w.speed_rpm,
    channels: w.channels.map((ch) =>
      channelEntry(ch.id, ch.bearing, ch.direction, ch.overall_rms_mm_s, ch.orders['1'], verdict),
    ),
  };
}

/**
 * The live message from the per-revolution live vectors, with each channel's overall level taken
 * from the last completed window (null before the first one).
 */
export function livePayloadFromFrame(
  f: LiveFrame,
  sensors: readonly SensorConfig[],
  lastWindow: WindowResult | null,
  asset: string,
  ts: string,
  verdict?: Verdicts,
): LivePayload {
  return {
    schema: SCHEMA_IDS.live,
    asset,
    ts,
    speed_rpm: f.speed_rpm,
    channels: f.channels.flatMap((ch) => {
      const s = sensors.find((x) => x.id === ch.id);
      // the frame comes from the same config; a stranger is left out rather than guessed
      if (!s) return [];
      const overall = lastWindow?.channels.find((x) => x.id === ch.id)?.overall_rms_mm_s ?? null;
      return [channelEntry(ch.id, s.bearing, s.direction, overall, ch.orders['1'], verdict)];
    }),
  };
}
