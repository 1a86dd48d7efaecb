import type { WindowResult } from '../dsp/types.js';
import { SCHEMA_IDS, type LivePayload } from './payloads.js';

/** The watcher's verdict on one channel, when it has one. */
export interface ChannelVerdict {
  readonly zone: 'A' | 'B' | 'C' | 'D' | null;
  readonly ok: boolean | null;
}

/** Builds the live message (overall level and 1x vector per channel) from one DSP window. */
export function livePayloadFromWindow(w: WindowResult, asset: string, ts: string, verdict?: (sensorId: string) => ChannelVerdict | undefined): LivePayload {
  return {
    schema: SCHEMA_IDS.live,
    asset,
    ts,
    speed_rpm: w.speed_rpm,
    channels: w.channels.map((ch) => {
      const x1 = ch.orders['1'];
      const v = verdict?.(ch.id);
      return {
        id: ch.id,
        bearing: ch.bearing,
        direction: ch.direction,
        overall_rms_mm_s: ch.overall_rms_mm_s,
        one_x_amp_pk_mm_s: x1 ? x1.amp_pk_mm_s : null,
        one_x_phase_deg: x1 ? x1.phase_deg : null,
        zone: v?.zone ?? null,
        ok: v?.ok ?? null,
      };
    }),
  };
}
