/**
 * Test signal synthesizer: exact, analytic vibration signals with a known truth, written by the
 * tests themselves (not by the product's simulator), so the DSP is checked against maths, not
 * against another part of the project.
 *
 * Velocity components are defined directly (amplitude and phase lag relative to the tach mark);
 * the acceleration written to the channel is their exact time derivative along the real shaft
 * angle, so speed drift is honoured sample by sample.
 */
import { STANDARD_GRAVITY_M_S2 } from '../../agent/dsp/acceleration.js';

export interface OrderSpec {
  readonly order: number;
  /** Zero-to-peak velocity, mm/s. */
  readonly velPk: number;
  /**
   * Phase lag, degrees of the order's own cycle, from the tach mark to the positive velocity peak.
   */
  readonly phaseDeg: number;
  /** Present only from this time on, seconds (a step change). */
  readonly fromS?: number;
  /** Present only before this time, seconds. */
  readonly untilS?: number;
}

export interface ToneSpec {
  readonly freqHz: number;
  /** Zero-to-peak velocity, mm/s (give this or accelPk). */
  readonly velPk?: number;
  /** Zero-to-peak acceleration, mm/s^2. */
  readonly accelPk?: number;
}

export interface ChannelSpec {
  readonly orders?: readonly OrderSpec[];
  readonly tones?: readonly ToneSpec[];
  readonly dcV?: number;
  /** Standard deviation of white acceleration noise, mm/s^2. */
  readonly noiseMmS2?: number;
  readonly sensitivityMvPerG?: number;
}

export interface SynthSpec {
  readonly sampleRate: number;
  readonly seconds: number;
  /** Shaft speed in r/min as a function of time in seconds. */
  readonly rpm: (t: number) => number;
  readonly channels: readonly ChannelSpec[];
  /** Channel index for the tach pulse (appended after `channels` when equal to channels.length). */
  readonly tachChannel: number;
  readonly tachHighV?: number;
  /** Rise time of the tach edge in samples (linear ramp; its 50 % point is the mark). */
  readonly tachRiseSamples?: number;
  /**
   * Shaft angles (rad, mod 2 pi) at which the pulse is missing entirely (e.g. a dirty mark):
   * revolutions given by index.
   */
  readonly dropPulsesAtRevs?: readonly number[];
  readonly seed?: number;
}

/** Deterministic Gaussian noise (mulberry32 + Box-Muller). */
export function gaussian(seed: number): () => number {
  let a = seed >>> 0;
  const uni = () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return () => {
    const u = Math.max(uni(), 1e-300);
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * uni());
  };
}

/**
 * Returns one Float32Array of volts per channel (channels, with the tach inserted at tachChannel).
 */
export function synthesize(spec: SynthSpec): Float32Array[] {
  const fs = spec.sampleRate;
  const n = Math.round(spec.seconds * fs);
  const nch = Math.max(spec.channels.length + 1, spec.tachChannel + 1);
  const out = Array.from({ length: nch }, () => new Float32Array(n));
  const tach = out[spec.tachChannel]!;
  const sensorSlots: number[] = [];
  for (let c = 0, s = 0; c < nch && s < spec.channels.length; c++)
    if (c !== spec.tachChannel) (sensorSlots.push(c), s++);
  const rnd = gaussian(spec.seed ?? 1);
  const high = spec.tachHighV ?? 5;
  const rise = spec.tachRiseSamples ?? 4;
  const drop = new Set(spec.dropPulsesAtRevs ?? []);

  // Shaft angle by trapezoidal integration of speed, and angular speed per sample.
  const theta = new Float64Array(n);
  const omega = new Float64Array(n);
  let th = 0;
  let wPrev = (2 * Math.PI * spec.rpm(0)) / 60;
  for (let i = 0; i < n; i++) {
    const w = (2 * Math.PI * spec.rpm(i / fs)) / 60;
    if (i > 0) th += (wPrev + w) / 2 / fs;
    theta[i] = th;
    omega[i] = w;
    wPrev = w;
  }
  for (let i = 0; i < n; i++) {
    const rampAngle = (rise * omega[i]!) / fs;
    const s = (theta[i]! + rampAngle / 2) % (2 * Math.PI);
    const rev = Math.floor((theta[i]! + rampAngle / 2) / (2 * Math.PI));
    let v = 0;
    if (!drop.has(rev)) v = s < rampAngle ? (high * s) / rampAngle : s < 0.6 ? high : 0;
    tach[i] = v;
  }
  spec.channels.forEach((ch, ci) => {
    const dst = out[sensorSlots[ci]!]!;
    const vPerMmS2 = (ch.sensitivityMvPerG ?? 100) / 1000 / (STANDARD_GRAVITY_M_S2 * 1000);
    const dc = ch.dcV ?? 0;
    for (let i = 0; i < n; i++) {
      const t = i / fs;
      let a = 0;
      for (const o of ch.orders ?? []) {
        if ((o.fromS !== undefined && t < o.fromS) || (o.untilS !== undefined && t >= o.untilS))
          continue;
        // v = V cos(k theta - phi)  ->  dv/dt = -V k omega sin(k theta - phi)
        a -=
          o.velPk *
          o.order *
          omega[i]! *
          Math.sin(o.order * theta[i]! - (o.phaseDeg * Math.PI) / 180);
      }
      for (const tn of ch.tones ?? []) {
        const w = 2 * Math.PI * tn.freqHz;
        const ap = tn.accelPk ?? (tn.velPk ?? 0) * w;
        a += ap * Math.cos(w * t);
      }
      if (ch.noiseMmS2) a += ch.noiseMmS2 * rnd();
      dst[i] = a * vPerMmS2 + dc;
    }
  });
  return out;
}

/**
 * Splits channel arrays into source items of `block` samples, as a recording driver would yield
 * them.
 */
export function* asBlocks(
  channels: Float32Array[],
  block = 4096,
): Generator<{ kind: 'samples'; startIndex: number; channels: Float32Array[] }> {
  const n = channels[0]!.length;
  for (let i = 0; i < n; i += block) {
    const e = Math.min(n, i + block);
    yield { kind: 'samples', startIndex: i, channels: channels.map((c) => c.subarray(i, e)) };
  }
}
