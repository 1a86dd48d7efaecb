import type { SensorConfig } from '../config/schema.js';
import type { SignalFacts } from '../dsp/signal-facts.js';
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

type Fault = { code: FaultCode; words: string };

/**
 * True when a 100 ms level varies by `ratio` or more about the window median, with a sudden jump.
 */
function levelStep(sig: SignalFacts, ratio: number): boolean {
  if (sig.groups < 3 || !(sig.group_rms_median_v > 0)) return false;
  const up = sig.group_rms_max_v / sig.group_rms_median_v;
  const down = sig.group_rms_min_v > 0 ? sig.group_rms_median_v / sig.group_rms_min_v : Infinity;
  return Math.max(up, down) >= ratio && sig.group_jump_ratio >= Math.sqrt(ratio);
}

/**
 * Faults read from the shape of the signal (agent/dsp/signal-facts.ts), with or without
 * full_scale_v: one-sided impulses (connector, cable), samples piling up at an extreme (clipping at
 * a limit nobody configured, or the sensor saturating below the input range), sudden level steps.
 * What can be read either way goes to `doubt`: the channel stays in, but cannot raise the machine
 * to zone D alone.
 */
function shapeFaults(
  sensor: SensorConfig,
  c: ChannelResult,
  window: WindowResult,
  s: WatcherSettings,
  byId: ReadonlyMap<string, ChannelResult>,
  p: Fault[],
  doubt: string[],
): void {
  const h = s.w.sensor_health;
  const sig = c.stats.signal;
  if (!sig) return;
  const n = c.stats.samples;
  const seconds = n / window.sample_rate_hz;

  // Impulses: one-sided ones are a connector or cable; ringing ones are mechanical impacts.
  const need = Math.max(2, h.spikes_per_s * seconds);
  if (sig.impulses_one_sided >= need) {
    const words =
      `${sig.impulses_one_sided} separate one-sided impulses in ` +
      `${f(seconds, 1)} s (${f(sig.impulses_one_sided / seconds, 1)} per ` +
      `second), up to ${f(sig.peak_over_level, 0)} times the signal's ` +
      `typical level, without the ringing of a mechanical impact`;
    if (sig.impulses_one_sided >= 0.5 * sig.impulses)
      p.push({
        code: 'spikes',
        words: `impulsive spikes: ${words} (a loose connector or a damaged cable)`,
      });
    else
      doubt.push(
        `${words}, among ${sig.impulses} impulses that ` +
          `mostly ring: a loose connector or real impacts`,
      );
  }

  // Samples piling up at one extreme value.
  if (
    !p.some((x) => x.code === 'clipped') &&
    sig.steps_spanned !== null &&
    sig.steps_spanned >= h.steps_spanned_min
  ) {
    for (const [pile, side] of [
      [sig.pile_high, 'top'],
      [sig.pile_low, 'bottom'],
    ] as const) {
      if (
        pile.samples / n < h.pile_share_min ||
        pile.samples < h.pile_ratio_min * Math.max(pile.below, 1)
      )
        continue;
      const share = `${pile.samples} samples (${f((100 * pile.samples) / n, 2)} %)`;
      const fs = sensor.full_scale_v;
      if (fs !== undefined && Math.abs(pile.v) < h.saturation_share * fs) {
        p.push({
          code: 'saturation',
          words:
            `saturated: ${share} sit at ${f(pile.v, 3)} V, the ${side} of the signal, ` +
            `with only ${pile.below} just below, well inside the ${fs} V input range: the ` +
            `sensor or its amplifier saturates, the true vibration is larger than measured`,
        });
      } else if (fs === undefined) {
        p.push({
          code: 'pile_up',
          words:
            `cut off: ${share} sit at ${f(pile.v, 3)} V, the ${side} of the ` +
            `signal, with only ${pile.below} just below: the signal is clipped at ` +
            `a limit that is not configured (the input range or the sensor's own ` +
            `output limit; set full_scale_v of this sensor to the input range)`,
        });
      }
      break;
    }
  }

  // Sudden level steps (spikes found above explain an uneven level already): the sensor's own when
  // the other sensors at its bearing stay steady.
  if (!p.some((x) => x.code === 'spikes') && levelStep(sig, h.level_step_ratio)) {
    const others = s.sensors
      .filter((x) => x.bearing === sensor.bearing && x.id !== sensor.id)
      .flatMap((x) => {
        const o = byId.get(x.id)?.stats.signal;
        return o ? [{ id: x.id, stepped: levelStep(o, Math.sqrt(h.level_step_ratio)) }] : [];
      });
    const ratio = Math.max(
      sig.group_rms_max_v / sig.group_rms_median_v,
      sig.group_rms_min_v > 0 ? sig.group_rms_median_v / sig.group_rms_min_v : Infinity,
    );
    const what =
      `the ${f(sig.group_s * 1000, 0)} ms r.m.s. stepped ` +
      `${Number.isFinite(ratio) ? `${f(ratio, 0)}-fold` : 'to nothing'} (between ` +
      `${f(sig.group_rms_min_v * 1000, 1)} and ${f(sig.group_rms_max_v * 1000, 1)} mV, ` +
      `typically ${f(sig.group_rms_median_v * 1000, 1)} mV) with a sudden jump`;
    if (others.length && others.every((o) => !o.stepped)) {
      p.push({
        code: 'level_step',
        words:
          `sudden level step: ${what}, while ` +
          `${others.map((o) => o.id).join(', ')} at ${sensor.bearing} stayed ` +
          `steady (an intermittent connection or a failing sensor)`,
      });
    } else if (!others.length) {
      doubt.push(
        `${what}, and no other sensor at ${sensor.bearing} can ` +
          `confirm it: a sensor fault or a real event (impact, rub)`,
      );
    }
  }
}

export function assessHealth(window: WindowResult, s: WatcherSettings): HealthReport {
  const h = s.w.sensor_health;
  const byId = new Map<string, ChannelResult>(window.channels.map((c) => [c.id, c]));

  // Faults that need no knowledge of whether the fan turns.
  const faults = new Map<string, Fault[]>();
  const doubts = new Map<string, string[]>(s.sensors.map((x) => [x.id, []]));
  for (const sensor of s.sensors) {
    const c = byId.get(sensor.id);
    const p: Fault[] = [];
    if (!c) p.push({ code: 'no_data', words: 'no data for this sensor in the window' });
    else if (c.stats.samples === 0) p.push({ code: 'no_data', words: 'no samples in the window' });
    else {
      if (sensor.bias_v && (c.stats.dc_v < sensor.bias_v.min || c.stats.dc_v > sensor.bias_v.max)) {
        const hint =
          c.stats.dc_v < sensor.bias_v.min
            ? 'short circuit or no sensor power'
            : 'open cable or sensor';
        p.push({
          code: 'bias',
          words:
            `bias ${f(c.stats.dc_v)} V outside its ` +
            `${sensor.bias_v.min}-${sensor.bias_v.max} V window (${hint})`,
        });
      }
      const clipShare = c.stats.clipped_samples / c.stats.samples;
      if (c.stats.clipped_samples > 0 && clipShare > h.clipped_share_max) {
        p.push({
          code: 'clipped',
          words:
            `clipped: ${c.stats.clipped_samples} of ${c.stats.samples} samples ` +
            `at full scale (input range too small or sensor overloaded)`,
        });
      }
      shapeFaults(sensor, c, window, s, byId, p, doubts.get(sensor.id)!);
    }
    faults.set(sensor.id, p);
  }

  const running =
    window.speed_rpm !== null ||
    s.sensors.some((sensor) => {
      const c = byId.get(sensor.id);
      return (
        faults.get(sensor.id)!.length === 0 &&
        c?.overall_rms_mm_s != null &&
        c.overall_rms_mm_s >= h.running_overall_mm_s
      );
    });

  if (running) {
    for (const sensor of s.sensors) {
      const c = byId.get(sensor.id);
      if (c && c.stats.samples > 0 && c.stats.ac_rms_v < h.flat_ac_rms_v) {
        faults.get(sensor.id)!.push({
          code: 'flat',
          words:
            `flat line: ${f(c.stats.ac_rms_v * 1000, 3)} mV r.m.s. ` +
            `while the fan turns (dead sensor or broken cable)`,
        });
      } else if (
        c?.stats.signal?.steps_spanned != null &&
        c.stats.signal.steps_spanned < h.steps_spanned_min
      ) {
        const sig = c.stats.signal;
        faults.get(sensor.id)!.push({
          code: 'quantisation_only',
          words:
            `only quantisation noise: the signal spans ${Math.round(sig.steps_spanned!)} ` +
            `converter steps of ${f(sig.min_step_v! * 1000, 3)} mV while the fan turns ` +
            `(sensor unpowered or disconnected, or its gain far too low)`,
        });
      }
    }
  }

  let tach: HealthReport['tach'];
  const pulses = window.tach.edges + window.tach.missing_pulses;
  if (window.tach.edges < 2 || window.revolutions === 0) {
    tach = running
      ? {
          state: 'lost',
          why:
            `no usable revolutions (${window.tach.edges} tach edges) while ` +
            `the fan vibrates: check the once-per-turn pickup and its mark`,
        }
      : { state: 'stopped', why: 'no tach pulses and no vibration: the fan appears to be stopped' };
  } else if (pulses > 0 && window.tach.missing_pulses / pulses > h.missing_pulse_share_max) {
    tach = {
      state: 'lost',
      why:
        `${window.tach.missing_pulses} of ${pulses} tach pulses missing: the ` +
        `reference is unreliable for phase (check the pickup gap and the mark)`,
    };
  } else
    tach = {
      state: 'ok',
      why: `${window.tach.edges} tach edges, ${window.revolutions} revolutions averaged`,
    };

  const channels = s.sensors.map((sensor): ChannelHealth => {
    const found = faults.get(sensor.id)!;
    const problems = found.map((x) => x.words);
    const ok = problems.length === 0;
    const doubt = ok ? doubts.get(sensor.id)! : [];
    const c = byId.get(sensor.id);
    const phaseNotes: string[] = [];
    if (ok) {
      if (tach.state !== 'ok')
        phaseNotes.push(tach.state === 'lost' ? 'tach lost: no phase reference' : 'fan stopped');
      else if (!c?.orders['1']) phaseNotes.push('no 1x vector in this window');
    }
    return {
      id: sensor.id,
      ok,
      phase_ok: ok && phaseNotes.length === 0,
      problems,
      faults: found,
      phase_notes: phaseNotes,
      doubts: doubt,
    };
  });

  return { channels, tach, running };
}
