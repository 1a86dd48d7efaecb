/**
 * The 1x amplitude of one sensor for amplitude-only balancing (the four-run method), from one
 * analysis window of the measuring path. Pure.
 *
 * With a working tach the synchronous 1x vector is used (its amplitude; the phase is ignored).
 * Without one (pickup missing or failed: the window averaged no revolutions) the 1x is read from
 * the spectrum: the largest spectral peak within `tolerancePct` of the running frequency the
 * technician states (from a handheld tachometer, the motor nameplate or the drive's display). The
 * window's peaks are then unfiltered, so the 1x is among them when it dominates, as it does on an
 * unbalanced fan.
 */
import type { WindowResult } from '../dsp/types.js';
import { UserError } from '../errors.js';

export interface OneXAmplitude {
  readonly sensor: string;
  /** Zero-to-peak velocity, mm/s (r.m.s. x sqrt 2 for the spectrum reading). */
  readonly amp_pk_mm_s: number;
  readonly amp_rms_mm_s: number;
  readonly freq_hz: number;
  /**
   * tach: the synchronous 1x vector's amplitude; spectrum: the spectral peak near the stated speed.
   */
  readonly source: 'tach' | 'spectrum';
  /**
   * True when no peak stood out near the stated speed although others did: the 1x is below the
   * measuring path's peak threshold, and the amplitude given is that threshold (an upper bound).
   */
  readonly upper_bound: boolean;
}

/**
 * Peaks below this share of the overall r.m.s. are not listed by the measuring path
 * (agent/dsp/analyzer.ts).
 */
export const PEAK_THRESHOLD_SHARE = 0.02;

export function oneXAmplitude(
  window: WindowResult,
  sensor: string,
  statedRpm: number,
  tolerancePct = 5,
): OneXAmplitude {
  const ch = window.channels.find((c) => c.id === sensor);
  if (!ch)
    throw new UserError(
      `sensor ${sensor}`,
      'is not in this window',
      `pick one of: ${window.channels.map((c) => c.id).join(', ')}`,
    );
  const v = ch.orders['1'];
  if (v && window.revolutions > 0)
    return {
      sensor,
      amp_pk_mm_s: v.amp_pk_mm_s,
      amp_rms_mm_s: v.amp_rms_mm_s,
      freq_hz: v.freq_hz,
      source: 'tach',
      upper_bound: false,
    };
  const f0 = statedRpm / 60;
  const near = ch.nonsync_peaks.filter(
    (p) => Math.abs(p.freq_hz - f0) <= (tolerancePct / 100) * f0,
  );
  if (!near.length && ch.overall_rms_mm_s !== null && ch.nonsync_peaks.length > 0) {
    // Other peaks were found, so the spectrum is healthy and the 1x is simply below the threshold.
    const bound = PEAK_THRESHOLD_SHARE * ch.overall_rms_mm_s;
    return {
      sensor,
      amp_pk_mm_s: bound * Math.SQRT2,
      amp_rms_mm_s: bound,
      freq_hz: f0,
      source: 'spectrum',
      upper_bound: true,
    };
  }
  if (!near.length) {
    throw new UserError(
      `sensor ${sensor}`,
      `no spectral peak within ${tolerancePct} % of ` +
        `${statedRpm.toFixed(0)} r/min (${f0.toFixed(2)} Hz) in this window` +
        (ch.nonsync_peaks.length
          ? ` (peaks at ${ch.nonsync_peaks.map((p) => `${p.freq_hz.toFixed(2)} Hz`).join(', ')})`
          : ''),
      'check the running speed you gave (handheld tachometer or the drive ' +
        'display), that the fan is at steady speed, and that the sensor is healthy',
    );
  }
  const best = near.reduce((a, b) => (b.amp_rms_mm_s > a.amp_rms_mm_s ? b : a));
  return {
    sensor,
    amp_pk_mm_s: best.amp_rms_mm_s * Math.SQRT2,
    amp_rms_mm_s: best.amp_rms_mm_s,
    freq_hz: best.freq_hz,
    source: 'spectrum',
    upper_bound: false,
  };
}
