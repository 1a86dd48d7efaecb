import { STANDARD_GRAVITY_M_S2 as G } from '../../agent/dsp/acceleration.js';
import { phasor, type Phasor, type RotorGeometry, type SensorPlace } from './physics.js';
import type { FaultSpec } from './scenario.js';

/**
 * Vibration signatures of faults other than unbalance (pure functions).
 *
 * Unbalance and support resonance come from the physics in physics.ts. The faults below are
 * signature
 * models: each is given by a velocity amplitude at rated speed and produces the pattern the trade
 * reads as that fault (common practice; see the notes beside each). Amplitudes scale with
 * (speed / rated)^2, as a force would, except the bent shaft's, which scales with speed (a fixed
 * bow moving faster). Phases follow the convention of physics.ts: lag from the tach edge, degrees
 * of the order's own cycle; `psi` below is the sensor's stator angle (direction angle plus mounting
 * angle).
 *
 * - misalignment: high 2x radial (full at the coupling bearing, half at the other), some 1x, and
 *   high axial 1x and 2x with the coupling bearing and the far bearing 180 deg apart.
 * - looseness: harmonics 1x..Nx (amplitude 1/sqrt(n)) and half orders, strongest in the loose
 *   direction, each phase wandering at random from revolution to revolution (erratic phase).
 * - bent shaft: axial 1x 180 deg apart end to end, plus radial 1x in phase at both bearings.
 * - eccentricity: 1x along one straight line, so H and V are in phase (or 180 apart) with a large
 *   amplitude ratio.
 * - bearing defect: a non-synchronous tone at a defect order and its harmonics, plus the housing
 *   resonance rung by the impacts (an amplitude-modulated carrier).
 * - tone: a fixed-frequency vibration not tied to running speed (e.g. a neighbouring machine).
 */

/** Largest synchronous order the harmonic table carries; half orders included (0.5, 1, 1.5 ...). */
export const MAX_ORDER = 10;

export interface SyncContext {
  readonly geometry: RotorGeometry;
  readonly place: SensorPlace;
  readonly sensorIndex: number;
  /** Shaft speed over rated speed. */
  readonly speedRatio: number;
  /** 0-1, growth of the fault. */
  readonly factor: number;
}

/** Receives one synchronous term: order in half orders (2 = 1x) and a velocity phasor in m/s. */
export type EmitSync = (halfOrder: number, v: Phasor) => void;

function psiOf(g: RotorGeometry, place: SensorPlace): number {
  return g.directions_deg[place.direction] + place.mounting_angle_deg;
}

function bearingIndex(g: RotorGeometry, name: string): number {
  return g.bearings.findIndex((b) => b.name === name);
}

/**
 * Synchronous (whole- and half-order) terms of a fault at one sensor. `phases` carries the fault's
 * random phases in degrees (looseness: one per term, moved by the synthesizer each block).
 */
export function syncTerms(
  f: FaultSpec,
  phases: Float64Array,
  ctx: SyncContext,
  emit: EmitSync,
): void {
  const { geometry: g, place } = ctx;
  const psi = psiOf(g, place);
  const axial = place.direction === 'axial';
  switch (f.kind) {
    case 'misalignment': {
      const a = f.amp_pk_mm_s * 1e-3 * ctx.speedRatio ** 2 * ctx.factor;
      const atCoupling = place.bearing === bearingIndex(g, f.coupling_bearing);
      if (axial) {
        const ax = a * f.axial_ratio * (atCoupling ? 1 : 0.7);
        const lag = psi + f.angle_deg + (atCoupling ? 0 : 180);
        emit(2, phasor(ax, lag));
        emit(4, phasor(0.5 * ax, lag));
      } else {
        const r = a * (atCoupling ? 1 : 0.5);
        emit(4, phasor(r, psi + f.angle_deg));
        emit(2, phasor(0.3 * r, psi + f.angle_deg));
      }
      return;
    }
    case 'looseness': {
      if (place.bearing !== bearingIndex(g, f.bearing)) return;
      const w = place.direction === f.direction ? 1 : axial ? 0.2 : 0.5;
      const a = f.amp_pk_mm_s * 1e-3 * ctx.speedRatio ** 2 * ctx.factor * w;
      for (let n = 1; n <= f.harmonics; n++)
        emit(2 * n, phasor(a / Math.sqrt(n), phases[n]! + psi));
      if (f.half_orders) {
        for (let n = 0; n < f.harmonics; n++)
          emit(
            2 * n + 1,
            phasor((0.5 * a) / Math.sqrt(n + 0.5), phases[f.harmonics + 1 + n]! + psi),
          );
      }
      return;
    }
    case 'bent_shaft': {
      const a = f.amp_pk_mm_s * 1e-3 * ctx.speedRatio * ctx.factor;
      if (axial) emit(2, phasor(a, psi + f.angle_deg + (place.bearing === 1 ? 180 : 0)));
      else emit(2, phasor(a * f.radial_ratio, psi + f.angle_deg));
      return;
    }
    case 'eccentricity': {
      if (axial || place.bearing !== bearingIndex(g, f.bearing)) return;
      const a = f.amp_pk_mm_s * 1e-3 * ctx.speedRatio ** 2 * ctx.factor;
      const line = f.line_deg ?? g.directions_deg.vertical + 15;
      const proj = Math.cos(((line - psi) * Math.PI) / 180);
      emit(2, phasor(a * proj, f.angle_deg));
      return;
    }
    default:
      return;
  }
}

/** Number of random phases a fault needs (looseness: one per harmonic and half order). */
export function phaseCount(f: FaultSpec): number {
  return f.kind === 'looseness' ? 2 * f.harmonics + 2 : 0;
}

/**
 * A non-synchronous (or high-order) component with its own phase accumulator: frequency
 * order x shaft speed + hz. `amplitude` gives its acceleration at a sensor, m/s^2 as a phasor.
 */
export interface ToneDef {
  readonly key: string;
  readonly order: number;
  readonly hz: number;
  amplitude(
    place: SensorPlace,
    sensorIndex: number,
    omegaRadS: number,
    speedRatio: number,
    factor: number,
  ): Phasor;
}

/** Per-sensor lag drawn from a fault's random numbers, degrees. */
function sensorLag(draws: Float64Array, slot: number, sensorIndex: number): number {
  return 360 * ((draws[slot % draws.length]! + 0.6180339887 * sensorIndex) % 1);
}

function velocityTone(
  key: string,
  order: number,
  hz: number,
  amp: (place: SensorPlace, sensorIndex: number, speedRatio: number) => number,
  lag: (sensorIndex: number) => number,
): ToneDef {
  return {
    key,
    order,
    hz,
    amplitude(place, s, omega, speedRatio, factor) {
      const v = amp(place, s, speedRatio) * factor;
      const w = order * omega + 2 * Math.PI * hz;
      // acceleration leads velocity by 90 deg: subtract 90 from the lag
      return phasor(v * w, lag(s) - 90);
    },
  };
}

/**
 * Tones a fault adds (bearing defects and fixed tones); `draws` are the fault's fixed random
 * numbers in [0,1).
 */
export function toneDefs(f: FaultSpec, g: RotorGeometry, draws: Float64Array): ToneDef[] {
  if (f.kind === 'bearing_defect') {
    const b = bearingIndex(g, f.bearing);
    const out: ToneDef[] = [];
    for (let h = 1; h <= f.harmonics; h++) {
      out.push(
        velocityTone(
          `${f.id}:${h}`,
          f.order * h,
          0,
          (place, _s, ratio) =>
            place.bearing !== b
              ? 0
              : (place.direction === 'axial' ? 0.3 : 1) * ((f.amp_pk_mm_s * 1e-3) / h) * ratio ** 2,
          (s) => sensorLag(draws, h, s),
        ),
      );
    }
    // impacts ring the housing: carrier (1 + cos defect) / 2 = carrier/2 + two sidebands/4,
    // phase-coherent because all three accumulators start together at 0
    const ring = (part: number, key: string, order: number): ToneDef => ({
      key: `${f.id}:${key}`,
      order,
      hz: f.ring_hz,
      amplitude(place, s, _omega, ratio, factor) {
        if (place.bearing !== b) return { re: 0, im: 0 };
        const a =
          f.ring_pk_g * G * part * (place.direction === 'axial' ? 0.3 : 1) * ratio ** 2 * factor;
        return phasor(a, sensorLag(draws, 20, s));
      },
    });
    out.push(ring(0.5, 'ring', 0), ring(0.25, 'ring+', f.order), ring(0.25, 'ring-', -f.order));
    return out;
  }
  if (f.kind === 'tone') {
    const b = f.bearing === undefined ? -1 : bearingIndex(g, f.bearing);
    return [
      velocityTone(
        `${f.id}:tone`,
        0,
        f.freq_hz,
        (place) =>
          b >= 0 && place.bearing !== b
            ? 0
            : (place.direction === 'axial' ? 0.5 : 1) * f.amp_pk_mm_s * 1e-3,
        (s) => sensorLag(draws, 1, s),
      ),
    ];
  }
  return [];
}

/** The blade-pass order (blades x running speed), radial only, scaling with speed squared. */
export function bladePassTone(blades: number, ampPkMmS: number, draws: Float64Array): ToneDef {
  return velocityTone(
    'blade-pass',
    blades,
    0,
    (place, _s, ratio) => (place.direction === 'axial' ? 0.3 : 1) * ampPkMmS * 1e-3 * ratio ** 2,
    (s) => sensorLag(draws, 0, s),
  );
}
