/**
 * A simulated rotor for balancing tests, written from the geometry and NOT from the solver's
 * complex algebra or its convention module, so it can catch a convention mistake.
 *
 * A rotor turns counter-clockwise (ccw) or clockwise (cw) seen from where the angles of the fixed
 * frame are counted. The tach fires when the reference mark passes the pickup (fixed angle
 * `pickupDeg`). A weight `angle_deg` from the mark measured against rotation trails the mark; with
 * rotation it leads it. Each weight pulls outward along its own direction; the machine answers at
 * each sensor (sensing along its fixed mounting angle) with a gain and a time delay per plane (the
 * delay expressed as degrees of rotation). The 1x vector is then measured the way the DSP defines
 * it: sample one revolution, take the once-per-turn Fourier component, phase = lag from the tach
 * edge to the positive peak.
 */
import type { AngleConvention } from '../agent/balance/conventions.js';
import type { Reading } from '../agent/balance/job.js';

export interface RigResponse {
  /** Amplitude per gram. */
  readonly gain: number;
  /** Delay of the response behind the force, degrees of rotation. */
  readonly lagDeg: number;
}

export interface RigSensor {
  readonly id: string;
  /** Fixed angle the sensor senses along. */
  readonly mountDeg: number;
  /** One response per correction plane. */
  readonly planes: readonly RigResponse[];
}

export interface Rig {
  readonly rotation: 'ccw' | 'cw';
  readonly pickupDeg: number;
  readonly sensors: readonly RigSensor[];
}

export interface RigMass {
  readonly plane: number;
  readonly mass_g: number;
  readonly angle_deg: number;
  readonly convention: AngleConvention;
}

const N = 720;
const D2R = Math.PI / 180;

export function measure(rig: Rig, masses: readonly RigMass[]): Record<string, Reading> {
  const dir = rig.rotation === 'ccw' ? 1 : -1;
  const out: Record<string, Reading> = {};
  for (const s of rig.sensors) {
    let xr = 0;
    let xi = 0;
    for (let k = 0; k < N; k++) {
      const turned = (360 * k) / N; // rotation since the tach edge, degrees
      let y = 0;
      for (const m of masses) {
        const resp = s.planes[m.plane]!;
        // Where the weight sits relative to the mark, as a fixed-frame angle offset.
        const offset = m.convention === 'against_rotation' ? -dir * m.angle_deg : dir * m.angle_deg;
        // Direction of the weight (and its force) resp.lagDeg of rotation ago.
        const gamma = rig.pickupDeg + dir * (turned - resp.lagDeg) + offset;
        y += resp.gain * m.mass_g * Math.cos((gamma - s.mountDeg) * D2R);
      }
      xr += y * Math.cos(turned * D2R);
      xi -= y * Math.sin(turned * D2R);
    }
    const amp = (2 * Math.hypot(xr, xi)) / N;
    let lag = (-Math.atan2(xi, xr) / D2R) % 360;
    if (lag < 0) lag += 360;
    out[s.id] = { amp, phase_deg: lag };
  }
  return out;
}

/** A two-bearing fan: each bearing feels both planes, the near one more (invented figures). */
export function twoBearingRig(rotation: 'ccw' | 'cw'): Rig {
  return {
    rotation,
    pickupDeg: 20,
    sensors: [
      {
        id: 'DE-V',
        mountDeg: 90,
        planes: [
          { gain: 0.06, lagDeg: 35 },
          { gain: 0.022, lagDeg: 70 },
        ],
      },
      {
        id: 'NDE-V',
        mountDeg: 90,
        planes: [
          { gain: 0.018, lagDeg: 80 },
          { gain: 0.055, lagDeg: 40 },
        ],
      },
    ],
  };
}

/** The example job of the CLI contract in issue 6: one sensor for two planes (cannot be solved). */
export const ISSUE_EXAMPLE_JOB = {
  angle_convention: 'against_rotation',
  planes: ['P1', 'P2'],
  runs: [
    { weights: [], readings: { 'DE-V': { amp: 6.1, phase_deg: 120 } } },
    {
      weights: [{ plane: 'P1', mass_g: 50, angle_deg: 0 }],
      readings: { 'DE-V': { amp: 3.2, phase_deg: 95 } },
    },
    {
      weights: [{ plane: 'P2', mass_g: 50, angle_deg: 0 }],
      readings: { 'DE-V': { amp: 7.0, phase_deg: 140 } },
    },
  ],
};
