import { phaseCount } from './faults.js';
import {
  add,
  rpmToRadS,
  scale,
  unbalancePhasor,
  ZERO,
  type AngleConvention,
  type Direction,
  type Phasor,
  type SupportDynamics,
} from './physics.js';
import { formatAt, type FaultSpec, type ScenarioEvent, type SimPlan } from './scenario.js';

/**
 * The state of the simulated fan over time, driven by the scenario's timeline.
 *
 * Two clocks: signal time `ts` (seconds of samples since the simulation started; it turns the
 * shaft) and scenario time `tc` (seconds since day 0 of the timeline; it grows the build-up and
 * fires events). tc = startS + timeScale * ts. With timeScale > 1 a week of slow changes plays in
 * minutes while the signal itself stays physical; speed ramps and coast-downs always last their
 * stated seconds of signal. Events before the start are replayed at construction so a run from day
 * 5 begins in day 5's state.
 */

/**
 * Friction torque over aerodynamic drag torque at the start of a coast-down (sets the curve's
 * tail).
 */
const COAST_FRICTION_SHARE = 0.05;

interface SpeedSegment {
  /** Signal time the segment starts, s (negative for history before the run). */
  readonly t0: number;
  readonly kind: 'ramp' | 'coast';
  readonly from: number;
  readonly to: number;
  readonly dur: number;
}

/**
 * Speed of a segment at signal time t, rad/s. Ramps are linear. A coast-down follows
 * d omega/dt = -a omega^2 - b (fan drag plus bearing friction), whose solution reaching 0 after
 * `dur` is omega(t) = omega0 e tan(atan(1/e) (1 - t/dur)), e = sqrt(b / (a omega0^2)).
 */
function segmentSpeed(s: SpeedSegment, t: number): number {
  const x = s.dur > 0 ? (t - s.t0) / s.dur : 1;
  if (x >= 1) return s.to;
  if (x <= 0) return s.from;
  if (s.kind === 'ramp') return s.from + (s.to - s.from) * x;
  const e = Math.sqrt(COAST_FRICTION_SHARE);
  return s.from * e * Math.tan(Math.atan(1 / e) * (1 - x));
}

interface BuildUp {
  readonly plane: number;
  /** kg m per second, as a phasor. */
  readonly rate: Phasor;
  /** Scenario time growth (re)started, s. */
  from: number;
  readonly until: number;
}

export interface ActiveFault {
  readonly spec: FaultSpec;
  readonly startTc: number;
  /**
   * Random numbers in [0, 1) drawn once when the fault appears, so a fault looks the same every
   * run.
   */
  readonly draws: Float64Array;
  /** Phases in degrees that the synthesizer moves at random (looseness); empty for other faults. */
  readonly phases: Float64Array;
}

export interface SensorFaultState {
  readonly kind: 'open' | 'short' | 'flat' | 'clipping';
  readonly gain: number;
  readonly limit_v: number | undefined;
}

export interface TachFaultState {
  readonly kind: 'lost' | 'intermittent';
  readonly missing_fraction: number;
}

interface SupportRamp {
  readonly from: SupportDynamics;
  readonly to: SupportDynamics;
  readonly startTc: number;
  readonly durS: number;
}

export interface AppliedEvent {
  /** Scenario time the event took effect, s. */
  readonly at_s: number;
  /** Plain-language description, e.g. "day 5 14:20:00 weight W1 thrown". */
  readonly text: string;
}

export interface WeightOnRotor {
  readonly id: string;
  readonly plane: string;
  readonly mass_g: number;
  readonly radius_mm: number;
  readonly angle_deg: number;
  readonly convention: AngleConvention;
}

export class FanState {
  readonly plan: SimPlan;
  readonly startS: number;
  readonly timeScale: number;
  private readonly draw: () => number;
  private next = 0;
  private segment: SpeedSegment;
  private readonly residual: Phasor[];
  private readonly buildUpFixed: Phasor[];
  private readonly buildUps: BuildUp[] = [];
  private readonly weightsOn = new Map<string, { w: WeightOnRotor; u: Phasor; plane: number }>();
  readonly faults = new Map<string, ActiveFault>();
  private readonly supports: { base: SupportDynamics; ramp?: SupportRamp }[][];
  readonly sensorFaults = new Map<number, SensorFaultState>();
  tachFault: TachFaultState | undefined;
  /** Bumped whenever the set of faults changes (the synthesizer rebuilds its tone list). */
  faultGeneration = 0;
  private readonly onEvent: (e: AppliedEvent) => void;
  private replaying = false;
  private lastTc: number;

  constructor(
    plan: SimPlan,
    opts: {
      startS: number;
      timeScale: number;
      draw: () => number;
      onEvent?: (e: AppliedEvent) => void;
    },
  ) {
    this.plan = plan;
    this.startS = opts.startS;
    this.timeScale = opts.timeScale;
    this.draw = opts.draw;
    this.onEvent = opts.onEvent ?? (() => undefined);
    const w0 = rpmToRadS(plan.startRpm);
    this.segment = { t0: -Infinity, kind: 'ramp', from: w0, to: w0, dur: 0 };
    const planes = plan.geometry.planes.map((p) => p.name);
    this.residual = planes.map(() => ZERO);
    this.buildUpFixed = planes.map(() => ZERO);
    for (const m of plan.unbalance) {
      const i = planes.indexOf(m.plane);
      this.residual[i] = add(
        this.residual[i]!,
        unbalancePhasor(m.mass_g, m.radius_mm, m.angle_deg, plan.angleConvention),
      );
    }
    for (const w of plan.weights) this.fitWeight({ ...w, convention: plan.angleConvention });
    this.supports = plan.geometry.bearings.map((b) =>
      (['vertical', 'horizontal', 'axial'] as const).map((d) => ({ base: b.support[d] })),
    );
    this.lastTc = opts.startS;
    // replay the history before the start, quietly
    this.replaying = true;
    this.advance(0);
    this.replaying = false;
  }

  /** Scenario time at signal time ts. */
  scenarioTime(ts: number): number {
    return this.startS + this.timeScale * ts;
  }

  /** Signal time at which scenario time tc happens (history before the start runs at scale 1). */
  private signalTime(tc: number): number {
    return tc <= this.startS ? tc - this.startS : (tc - this.startS) / this.timeScale;
  }

  /** Applies every event due by signal time ts. */
  advance(ts: number): void {
    const tc = this.scenarioTime(ts);
    this.lastTc = tc;
    const tl = this.plan.timeline;
    while (this.next < tl.length && tl[this.next]!.at <= tc) {
      this.apply(tl[this.next]!, this.next);
      this.next++;
    }
  }

  /** Shaft speed at signal time ts, rad/s, including the slow drift. */
  omega(ts: number): number {
    const base = segmentSpeed(this.segment, ts);
    if (this.plan.driftFraction === 0) return base;
    return (
      base *
      (1 +
        this.plan.driftFraction *
          Math.sin((2 * Math.PI * (this.startS + ts)) / this.plan.driftPeriodS))
    );
  }

  /** Unbalance of every plane at scenario time tc, kg m phasors. */
  unbalance(tc: number): Phasor[] {
    const u = this.residual.map((r, i) => add(r, this.buildUpFixed[i]!));
    for (const b of this.buildUps)
      u[b.plane] = add(u[b.plane]!, scale(b.rate, Math.max(0, Math.min(tc, b.until) - b.from)));
    for (const { u: wu, plane } of this.weightsOn.values()) u[plane] = add(u[plane]!, wu);
    return u;
  }

  private supportSlot(
    bearing: number,
    direction: Direction,
  ): { base: SupportDynamics; ramp?: SupportRamp } {
    return this.supports[bearing]![
      direction === 'vertical' ? 0 : direction === 'horizontal' ? 1 : 2
    ]!;
  }

  support(bearing: number, direction: Direction, tc: number): SupportDynamics {
    const s = this.supportSlot(bearing, direction);
    if (!s.ramp) return s.base;
    const x = s.ramp.durS > 0 ? Math.min(1, Math.max(0, (tc - s.ramp.startTc) / s.ramp.durS)) : 1;
    const lerp = (a: number, b: number) => a + (b - a) * x;
    return {
      stiffness_n_per_m: lerp(s.ramp.from.stiffness_n_per_m, s.ramp.to.stiffness_n_per_m),
      natural_hz: lerp(s.ramp.from.natural_hz, s.ramp.to.natural_hz),
      damping_ratio: lerp(s.ramp.from.damping_ratio, s.ramp.to.damping_ratio),
    };
  }

  /** Size of a fault at scenario time tc, 0-1 (grows linearly over its ramp_days). */
  faultFactor(f: ActiveFault, tc: number): number {
    const ramp = f.spec.ramp_days * 86400;
    return ramp > 0 ? Math.min(1, Math.max(0, (tc - f.startTc) / ramp)) : 1;
  }

  weights(): WeightOnRotor[] {
    return [...this.weightsOn.values()].map((x) => x.w);
  }

  private log(e: AppliedEvent): void {
    if (!this.replaying) this.onEvent(e);
  }

  /** Fits a balance weight now (e.g. a trial or correction weight of a balancing job). */
  addWeight(w: WeightOnRotor): void {
    if (this.weightsOn.has(w.id)) throw new Error(`weight "${w.id}" is already on the rotor`);
    this.fitWeight(w);
    this.log({
      at_s: this.lastTc,
      text:
        `${formatAt(this.lastTc)} weight ${w.id} fitted: ` +
        `${w.mass_g} g at ${w.radius_mm} mm, ${w.angle_deg} deg ` +
        `${w.convention.replace('_', ' ')}, plane ${w.plane}`,
    });
  }

  /** Takes a weight off now. Returns false when no such weight is on the rotor. */
  removeWeight(id: string): boolean {
    if (!this.weightsOn.delete(id)) return false;
    this.log({ at_s: this.lastTc, text: `${formatAt(this.lastTc)} weight ${id} removed` });
    return true;
  }

  private fitWeight(w: WeightOnRotor): void {
    const plane = this.plan.geometry.planes.findIndex((p) => p.name === w.plane);
    if (plane < 0) throw new Error(`no plane "${w.plane}" on the rotor`);
    this.weightsOn.set(w.id, {
      w,
      u: unbalancePhasor(w.mass_g, w.radius_mm, w.angle_deg, w.convention),
      plane,
    });
  }

  private planeIndex(name: string): number {
    return this.plan.geometry.planes.findIndex((p) => p.name === name);
  }

  private bearingIndex(name: string): number {
    return this.plan.geometry.bearings.findIndex((b) => b.name === name);
  }

  private apply(e: ScenarioEvent, index: number): void {
    const tc = e.at;
    const ts = this.signalTime(tc);
    const when = formatAt(tc);
    const say = (text: string) =>
      this.log({ at_s: tc, text: `${when} ${text}${e.note ? ` (${e.note})` : ''}` });
    if (e.start || e.speed) {
      const s = (e.start ?? e.speed)!;
      this.segment = {
        t0: ts,
        kind: 'ramp',
        from: segmentSpeed(this.segment, ts),
        to: rpmToRadS(s.rpm),
        dur: s.ramp_s,
      };
      say(`${e.start ? 'start-up' : 'speed change'} to ${s.rpm} r/min over ${s.ramp_s} s`);
    } else if (e.stop) {
      this.segment = {
        t0: ts,
        kind: 'coast',
        from: segmentSpeed(this.segment, ts),
        to: 0,
        dur: e.stop.coast_s,
      };
      say(`stop: coast-down over ${e.stop.coast_s} s`);
    } else if (e.build_up) {
      const b = e.build_up;
      const rate = unbalancePhasor(
        b.mass_g_per_day / 86400,
        b.radius_mm,
        b.angle_deg,
        this.plan.angleConvention,
      );
      this.buildUps.push({
        plane: this.planeIndex(b.plane),
        rate,
        from: tc,
        until: b.days === undefined ? Infinity : tc + b.days * 86400,
      });
      say(
        `build-up starts on plane ${b.plane}: ${b.mass_g_per_day} g/day ` +
          `at ${b.radius_mm} mm, ${b.angle_deg} deg`,
      );
    } else if (e.build_up_shed) {
      const p = this.planeIndex(e.build_up_shed.plane);
      const keep = 1 - e.build_up_shed.fraction;
      let fixed = scale(this.buildUpFixed[p]!, keep);
      for (const b of this.buildUps) {
        if (b.plane !== p) continue;
        fixed = add(fixed, scale(b.rate, keep * Math.max(0, Math.min(tc, b.until) - b.from)));
        b.from = Math.min(tc, b.until);
      }
      this.buildUpFixed[p] = fixed;
      say(
        `${Math.round(e.build_up_shed.fraction * 100)} % of the ` +
          `build-up on plane ${e.build_up_shed.plane} flakes off`,
      );
    } else if (e.weight_added) {
      this.fitWeight({ ...e.weight_added, convention: this.plan.angleConvention });
      const w = e.weight_added;
      say(
        `weight ${w.id} fitted: ${w.mass_g} g at ` +
          `${w.radius_mm} mm, ${w.angle_deg} deg, plane ${w.plane}`,
      );
    } else if (e.weight_thrown || e.weight_removed) {
      const id = (e.weight_thrown ?? e.weight_removed)!.id;
      this.weightsOn.delete(id);
      say(`weight ${id} ${e.weight_thrown ? 'thrown' : 'removed'}`);
    } else if (e.fault) {
      const draws = new Float64Array(32);
      for (let i = 0; i < draws.length; i++) draws[i] = this.draw();
      const phases = new Float64Array(phaseCount(e.fault));
      for (let i = 0; i < phases.length; i++) phases[i] = 360 * this.draw();
      this.faults.set(e.fault.id, { spec: e.fault, startTc: tc, draws, phases });
      this.faultGeneration++;
      say(
        `fault ${e.fault.id} (${e.fault.kind.replace('_', ' ')}) ` +
          `appears${e.fault.ramp_days > 0 ? ` and grows over ${e.fault.ramp_days} days` : ''}`,
      );
    } else if (e.fault_cleared) {
      this.faults.delete(e.fault_cleared.id);
      this.faultGeneration++;
      say(`fault ${e.fault_cleared.id} cleared`);
    } else if (e.support_change) {
      const c = e.support_change;
      const b = this.bearingIndex(c.bearing);
      const slot = this.supportSlot(b, c.direction);
      const from = this.support(b, c.direction, tc);
      const k =
        c.stiffness_mn_per_m !== undefined ? c.stiffness_mn_per_m * 1e6 : from.stiffness_n_per_m;
      const to: SupportDynamics = {
        stiffness_n_per_m: k,
        // a stiffness change alone keeps the mass on the support: f_n = sqrt(k/m) / 2 pi moves with
        // sqrt(k)
        natural_hz: c.natural_hz ?? from.natural_hz * Math.sqrt(k / from.stiffness_n_per_m),
        damping_ratio: c.damping_ratio ?? from.damping_ratio,
      };
      slot.base = to;
      slot.ramp = { from, to, startTc: tc, durS: c.ramp_days * 86400 };
      say(
        `support of ${c.bearing} ${c.direction} changes: natural ` +
          `frequency ${to.natural_hz.toFixed(1)} Hz, stiffness ` +
          `${(to.stiffness_n_per_m / 1e6).toFixed(1)} MN/m`,
      );
    } else if (e.sensor_fault) {
      const f = e.sensor_fault;
      this.sensorFaults.set(this.sensorIndex(f.sensor), {
        kind: f.kind,
        gain: f.gain,
        limit_v: f.limit_v,
      });
      say(
        `sensor ${f.sensor}: ` +
          `${f.kind === 'open' ? 'open cable' : f.kind === 'short' ? 'short circuit' : f.kind === 'flat' ? 'flat line' : 'clipping'}`,
      );
    } else if (e.sensor_repaired) {
      this.sensorFaults.delete(this.sensorIndex(e.sensor_repaired.sensor));
      say(`sensor ${e.sensor_repaired.sensor} repaired`);
    } else if (e.tach_fault) {
      this.tachFault = { kind: e.tach_fault.kind, missing_fraction: e.tach_fault.missing_fraction };
      say(
        e.tach_fault.kind === 'lost'
          ? 'tach signal lost'
          : `tach misses ${Math.round(e.tach_fault.missing_fraction * 100)} % of pulses`,
      );
    } else if (e.tach_repaired) {
      this.tachFault = undefined;
      say('tach repaired');
    } else {
      throw new Error(`timeline[${index}] has no action (the schema should have caught this)`);
    }
  }

  private sensorIndex(id: string): number {
    return this.plan.sensors.findIndex((s) => s.id === id);
  }
}
