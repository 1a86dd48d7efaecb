/**
 * Plant imperfections for the sensor-fault tests, written here and nowhere else: neither the
 * product's simulator (drivers/sim) nor the test synthesizer (synth.ts) makes these signals. Every
 * channel is volts as a board would deliver them: an acceleration signal in g times the
 * sensitivity, plus whatever the fault adds, then the converter (clamped to its rails, rounded to
 * its step).
 *
 * Bases of the shapes:
 * - Bearing outer-race defect: each roller passing the defect strikes it and rings a structural
 *   resonance of the housing (a decaying sinusoid, a few kHz), at the ball-pass frequency of the
 *   outer race BPFO = (n/2) f_r (1 - (d/D) cos(contact angle)) (textbook bearing kinematics); the
 *   rollers slip a little so the impacts are not exactly periodic (1-2 %, common practice), and
 *   the impact force is modulated once per turn by the rotating load (common practice).
 * - Intermittent connector: the contact opens for a fraction of a millisecond and the input jumps
 *   one way by several volts, into the board's rail, then comes back without ringing (common
 *   practice).
 */
import { STANDARD_GRAVITY_M_S2 } from '../../agent/dsp/acceleration.js';

/** Deterministic uniform numbers in [0, 1) (mulberry32). */
export function uniform(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function normal(seed: number): () => number {
  const u = uniform(seed);
  return () => Math.sqrt(-2 * Math.log(Math.max(u(), 1e-300))) * Math.cos(2 * Math.PI * u());
}

export interface Plant {
  readonly sampleRate: number;
  readonly seconds: number;
  readonly rpm: number;
  /** Sensor channels, then the tach as the last channel. */
  readonly channels: number;
}

/**
 * A steady 1x of `velPkMmS` (zero-to-peak velocity, mm/s) at phase lag `phaseDeg`, as acceleration
 * in g.
 */
export function oneXAccelG(p: Plant, velPkMmS: number, phaseDeg: number, t: number): number {
  const w = (2 * Math.PI * p.rpm) / 60;
  // v = V cos(w t - phi) -> a = -V w sin(w t - phi); mm/s^2 -> g
  return (
    (-velPkMmS * w * Math.sin(w * t - (phaseDeg * Math.PI) / 180)) / (STANDARD_GRAVITY_M_S2 * 1000)
  );
}

/** A once-per-turn pulse, 0 or 5 V, rising at shaft angle 0. */
export function tachV(p: Plant, t: number): number {
  const turns = (t * p.rpm) / 60;
  return turns - Math.floor(turns) < 0.1 ? 5 : 0;
}

export interface BearingDefect {
  /** Impacts per second (BPFO), Hz. */
  readonly bpfoHz: number;
  readonly resonanceHz: number;
  readonly damping: number;
  /** Peak acceleration of one impact's ringing, g. */
  readonly impactG: number;
  /** Depth of the once-per-turn modulation (0-1). */
  readonly modulation: number;
  /** Random slip of the impact times, share of the period. */
  readonly slip: number;
  readonly seed: number;
}

/** Impact ringing of an outer-race defect over the whole record, g per sample. */
export function bearingDefectG(p: Plant, d: BearingDefect): Float64Array {
  const n = Math.round(p.seconds * p.sampleRate);
  const out = new Float64Array(n);
  const u = uniform(d.seed);
  const wr = 2 * Math.PI * d.resonanceHz;
  const decay = d.damping * wr;
  const ringSamples = Math.ceil((8 / decay) * p.sampleRate);
  const fr = p.rpm / 60;
  for (let t = 0; t < p.seconds; t += (1 + d.slip * (2 * u() - 1)) / d.bpfoHz) {
    const a =
      (d.impactG * (1 + d.modulation * Math.cos(2 * Math.PI * fr * t))) / (1 + d.modulation);
    const i0 = Math.ceil(t * p.sampleRate);
    for (let i = i0; i < Math.min(n, i0 + ringSamples); i++) {
      const dt = i / p.sampleRate - t;
      out[i]! += a * Math.exp(-decay * dt) * Math.sin(wr * dt);
    }
  }
  return out;
}

export interface ConnectorFault {
  /** Mean openings per second (random times). */
  readonly perS: number;
  /** Size of the jump, volts (before the rail), drawn between these. */
  readonly jumpV: readonly [number, number];
  /** How long the contact stays open, s, drawn between these. */
  readonly openS: readonly [number, number];
  readonly seed: number;
}

/**
 * Volts a bad connector adds: one-sided jumps with a 50 us edge, random sign per opening. Returns
 * the opening times too.
 */
export function connectorV(p: Plant, c: ConnectorFault): { v: Float64Array; openings: number } {
  const n = Math.round(p.seconds * p.sampleRate);
  const v = new Float64Array(n);
  const u = uniform(c.seed);
  let openings = 0;
  const edge = Math.max(1, Math.round(50e-6 * p.sampleRate));
  for (let t = -Math.log(1 - u()) / c.perS; t < p.seconds; t += -Math.log(1 - u()) / c.perS) {
    const jump = (c.jumpV[0] + (c.jumpV[1] - c.jumpV[0]) * u()) * (u() < 0.5 ? -1 : 1);
    const len = Math.max(
      1,
      Math.round((c.openS[0] + (c.openS[1] - c.openS[0]) * u()) * p.sampleRate),
    );
    const i0 = Math.floor(t * p.sampleRate);
    for (let k = 0; k < len + edge && i0 + k < n; k++) {
      const rampUp = Math.min(1, (k + 1) / edge);
      const rampDown = Math.min(1, (len + edge - k) / edge);
      v[i0 + k]! += jump * Math.min(rampUp, rampDown);
    }
    openings++;
  }
  return { v, openings };
}

/** The board's converter: clamps to +/- railV and rounds to a step of 2 railV / 2^bits. */
export function convert(volts: ArrayLike<number>, railV: number, bits: number): Float32Array {
  const step = (2 * railV) / 2 ** bits;
  const out = new Float32Array(volts.length);
  for (let i = 0; i < volts.length; i++)
    out[i] = Math.round(Math.max(-railV, Math.min(railV, volts[i]!)) / step) * step;
  return out;
}
