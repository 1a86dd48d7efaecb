import type { ChannelResult, WindowResult } from '../dsp/types.js';
import type { FaultCode } from './events.js';
import type { WatcherSettings } from './settings.js';

/**
 * Sensor and tach health for one window (machinery-protection practice: a channel whose sensor or
 * cable has failed is "not OK" and takes no part in any verdict; it is reported itself).
 */

export interface ChannelHealth {
  readonly id: string;
  /** Sensor healthy: the channel's overall may be judged. */
  readonly ok: boolean;
  /** Healthy, the tach is good and a 1x vector exists: the channel may take part in phase rules. */
  readonly phase_ok: boolean;
  /** Why the sensor is not OK, in words (empty when OK). */
  readonly problems: readonly string[];
  /** The same problems as codes, in the same order. */
  readonly faults: readonly { readonly code: FaultCode; readonly words: string }[];
  /** Why an OK channel cannot take part in phase rules, in words. */
  readonly phase_notes: readonly string[];
  /**
   * Findings that could be a sensor fault or real vibration: the channel stays in the zones, but it
   * cannot raise the machine to zone D on its own (empty when none).
   */
  readonly doubts: readonly string[];
}

export type TachState = 'ok' | 'lost' | 'stopped';

export interface HealthReport {
  /** One entry per configured sensor, in config order. */
  readonly channels: readonly ChannelHealth[];
  readonly tach: { readonly state: TachState; readonly why: string };
  /** Whether the fan is judged to be turning (speed present, or vibration on a healthy channel). */
  readonly running: boolean;
}

function f(v: number, digits = 2): string {
  return v.toFixed(digits);
}

export function assessHealth(window: WindowResult, s: WatcherSettings): HealthReport {
  const h = s.w.sensor_health;
  const byId = new Map<string, ChannelResult>(window.channels.map((c) => [c.id, c]));

  // Faults that need no knowledge of whether the fan turns.
  type Fault = { code: FaultCode; words: string };
  const faults = new Map<string, Fault[]>();
  for (const sensor of s.sensors) {
    const c = byId.get(sensor.id);
    const p: Fault[] = [];
    if (!c) p.push({ code: 'no_data', words: 'no data for this sensor in the window' });
    else if (c.stats.samples === 0) p.push({ code: 'no_data', words: 'no samples in the window' });
    else {
      if (sensor.bias_v && (c.stats.dc_v < sensor.bias_v.min || c.stats.dc_v > sensor.bias_v.max)) {
        const hint = c.stats.dc_v < sensor.bias_v.min ? 'short circuit or no sensor power' : 'open cable or sensor';
        p.push({ code: 'bias', words: `bias ${f(c.stats.dc_v)} V outside its ${sensor.bias_v.min}-${sensor.bias_v.max} V window (${hint})` });
      }
      const clipShare = c.stats.clipped_samples / c.stats.samples;
      if (c.stats.clipped_samples > 0 && clipShare > h.clipped_share_max) {
        p.push({ code: 'clipped', words: `clipped: ${c.stats.clipped_samples} of ${c.stats.samples} samples at full scale (input range too small or sensor overloaded)` });
      }
    }
    faults.set(sensor.id, p);
  }

  const running =
    window.speed_rpm !== null ||
    s.sensors.some((sensor) => {
      const c = byId.get(sensor.id);
      return faults.get(sensor.id)!.length === 0 && c?.overall_rms_mm_s != null && c.overall_rms_mm_s >= h.running_overall_mm_s;
    });

  if (running) {
    for (const sensor of s.sensors) {
      const c = byId.get(sensor.id);
      if (c && c.stats.samples > 0 && c.stats.ac_rms_v < h.flat_ac_rms_v) {
        faults.get(sensor.id)!.push({ code: 'flat', words: `flat line: ${f(c.stats.ac_rms_v * 1000, 3)} mV r.m.s. while the fan turns (dead sensor or broken cable)` });
      }
    }
  }

  let tach: HealthReport['tach'];
  const pulses = window.tach.edges + window.tach.missing_pulses;
  if (window.tach.edges < 2 || window.revolutions === 0) {
    tach = running
      ? { state: 'lost', why: `no usable revolutions (${window.tach.edges} tach edges) while the fan vibrates: check the once-per-turn pickup and its mark` }
      : { state: 'stopped', why: 'no tach pulses and no vibration: the fan appears to be stopped' };
  } else if (pulses > 0 && window.tach.missing_pulses / pulses > h.missing_pulse_share_max) {
    tach = {
      state: 'lost',
      why: `${window.tach.missing_pulses} of ${pulses} tach pulses missing: the reference is unreliable for phase (check the pickup gap and the mark)`,
    };
  } else tach = { state: 'ok', why: `${window.tach.edges} tach edges, ${window.revolutions} revolutions averaged` };

  const channels = s.sensors.map((sensor): ChannelHealth => {
    const found = faults.get(sensor.id)!;
    const problems = found.map((x) => x.words);
    const ok = problems.length === 0;
    const c = byId.get(sensor.id);
    const phaseNotes: string[] = [];
    if (ok) {
      if (tach.state !== 'ok') phaseNotes.push(tach.state === 'lost' ? 'tach lost: no phase reference' : 'fan stopped');
      else if (!c?.orders['1']) phaseNotes.push('no 1x vector in this window');
    }
    return { id: sensor.id, ok, phase_ok: ok && phaseNotes.length === 0, problems, faults: found, phase_notes: phaseNotes, doubts: [] };
  });

  return { channels, tach, running };
}
