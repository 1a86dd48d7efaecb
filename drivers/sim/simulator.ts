import {
  bladePassTone,
  MAX_ORDER,
  phaseCount,
  syncTerms,
  toneDefs,
  type ToneDef,
} from './faults.js';
import {
  lagDeg,
  magnitude,
  STANDARD_GRAVITY_M_S2,
  unbalanceVelocity,
  type Phasor,
  type RotorGeometry,
} from './physics.js';
import { NOISE_TABLE_BITS, normalTable, Random } from './random.js';
import type { SimPlan } from './scenario.js';
import { FanState, type ActiveFault, type AppliedEvent } from './state.js';

/**
 * Synthesizes the acquisition board's channels (volts) for the simulated fan, block by block.
 *
 * Internally the signal is made in sub-blocks of SUB_BLOCK samples. At the end of each sub-block
 * the fan's state (speed, unbalance, faults, supports) is evaluated and turned into complex
 * amplitudes per channel and order; within the sub-block the amplitudes and the speed are
 * interpolated linearly, and the shaft angle is integrated from the speed sample by sample.
 * Everything is preallocated: rendering allocates nothing per sample (a few small objects per
 * sub-block when the state is evaluated).
 *
 * Sensor channels: bias + acceleration (g) x sensitivity (V/g) + white noise, then the sensor's
 * fault (open cable, short, flat line, clipping) and the board's input range. Tach channel: a pulse
 * whose rising edge ramps linearly over rise_s and crosses its 50 % level exactly when the shaft
 * angle is a whole number of revolutions (the reference mark at the pickup), so edge interpolation
 * between samples recovers the mark to a small fraction of a sample.
 */

export const SUB_BLOCK = 256;
const HALF_ORDERS = 2 * MAX_ORDER;
const TWO_PI = 2 * Math.PI;
const FOUR_PI = 4 * Math.PI;

export interface SimulatorOptions {
  /** Scenario time to start at, seconds from day 0 (e.g. 5 * 86400 to start on day 5). */
  readonly startS?: number;
  /** Scenario seconds per signal second (1 = real scenario pace). */
  readonly timeScale?: number;
  /** Overrides the scenario's seed. */
  readonly seed?: number;
  /**
   * Called for every timeline event as it takes effect (not for the history replayed before
   * startS).
   */
  readonly onEvent?: (e: AppliedEvent) => void;
}

export interface OrderVectorModel {
  readonly id: string;
  readonly amp_pk_mm_s: number;
  readonly phase_deg: number;
}

interface ToneRun {
  readonly def: ToneDef;
  /** The fault the tone belongs to (its growth factor applies); none for the blade pass. */
  readonly fault?: ActiveFault;
  phase: number;
}

export class FanSimulator {
  readonly plan: SimPlan;
  readonly state: FanState;
  readonly sampleRate: number;
  readonly channelCount: number;
  private readonly dt: number;
  private readonly rng: Random;
  private readonly noise: Float32Array;
  private noiseState: number;
  private readonly bladeDraws = new Float64Array(4);

  /** Sample index (from 0) of the next sample render() writes. */
  private produced = 0;
  /** Sample index of the first sample of the current sub-block. */
  private subStart = -SUB_BLOCK;
  private subPos = SUB_BLOCK;
  private phi = 0;
  private omegaLast: number;
  private readonly sub: Float32Array[];
  private readonly subEdges = new Float64Array(SUB_BLOCK + 1);
  private subEdgeCount = 0;
  private edgeBuf = new Float64Array(64);
  private edgeCount = 0;

  // per sub-block work arrays
  private readonly omegaArr = new Float64Array(SUB_BLOCK);
  private readonly dphiArr = new Float64Array(SUB_BLOCK);
  private readonly phiArr = new Float64Array(SUB_BLOCK);
  /** Shaft angle turned in the current sub-block, rad. */
  private subTurn = 0;
  private readonly cosT: Float64Array;
  private readonly sinT: Float64Array;
  private readonly acc = new Float64Array(SUB_BLOCK);
  /**
   * Coefficients in volts per sensor and half order, [sensor][halfOrder][re, im], at the previous
   * and current sub-block end.
   */
  private coefPrev: Float64Array;
  private coefNext: Float64Array;
  private readonly activeOrders: Uint8Array;
  private tones: ToneRun[] = [];
  private toneCoefPrev = new Float64Array(0);
  private toneCoefNext = new Float64Array(0);
  /** cos and sin rows of every tone for one sub-block. */
  private toneBuf = new Float64Array(0);
  private toneGeneration = -1;
  private pulsePresent = true;
  private lastPsi = 0;

  constructor(plan: SimPlan, opts: SimulatorOptions = {}) {
    this.plan = plan;
    this.sampleRate = plan.sampleRate;
    this.channelCount = plan.channelCount;
    this.dt = 1 / plan.sampleRate;
    const seed = opts.seed ?? plan.seed;
    // mix the start time into the seed so runs from different days do not share noise
    this.rng = new Random((seed * 2654435761 + Math.floor((opts.startS ?? 0) / 60)) >>> 0);
    this.noise = normalTable(this.rng);
    this.noiseState = (this.rng.uint32() | 1) >>> 0;
    for (let i = 0; i < this.bladeDraws.length; i++) this.bladeDraws[i] = this.rng.uniform();
    this.state = new FanState(plan, {
      startS: opts.startS ?? 0,
      timeScale: opts.timeScale ?? 1,
      draw: () => this.rng.uniform(),
      onEvent: opts.onEvent,
    });
    this.sub = Array.from({ length: plan.channelCount }, () => new Float32Array(SUB_BLOCK));
    this.cosT = new Float64Array((HALF_ORDERS + 1) * SUB_BLOCK);
    this.sinT = new Float64Array((HALF_ORDERS + 1) * SUB_BLOCK);
    const nCoef = plan.sensors.length * (HALF_ORDERS + 1) * 2;
    this.coefPrev = new Float64Array(nCoef);
    this.coefNext = new Float64Array(nCoef);
    this.activeOrders = new Uint8Array(plan.sensors.length * (HALF_ORDERS + 1));
    this.omegaLast = this.state.omega(0);
    this.pulsePresent = this.state.tachFault?.kind !== 'lost';
    this.syncTones();
    this.evaluate(0, this.omegaLast, this.coefNext, this.toneCoefNext);
  }

  /** Sample index of the next sample to be rendered. */
  get sampleIndex(): number {
    return this.produced;
  }

  /** Scenario time of the next sample, seconds from day 0. */
  get scenarioTimeS(): number {
    return this.state.scenarioTime(this.produced * this.dt);
  }

  /** Shaft speed at the last rendered sample, r/min. */
  get speedRpm(): number {
    return (this.omegaLast * 60) / TWO_PI;
  }

  /**
   * What the model says the velocity vector of one order is at every sensor right now (steady state
   * at the current speed): unbalance and the synchronous fault terms. Noise, sensor faults and the
   * tones (blade pass, bearing defects, fixed tones) are not included. Order 1 is the 1x vector.
   */
  modelOrder(order = 1): OrderVectorModel[] {
    const ts = this.produced * this.dt;
    const tc = this.state.scenarioTime(ts);
    const omega = this.state.omega(ts);
    const geometry = this.currentGeometry(tc);
    const u = this.state.unbalance(tc);
    return this.plan.sensors.map((s, i) => {
      let v: Phasor =
        order === 1 ? unbalanceVelocity(geometry, s.place, u, omega) : { re: 0, im: 0 };
      this.forEachSyncTerm(geometry, i, omega, tc, (h, p) => {
        if (h === 2 * order) v = { re: v.re + p.re, im: v.im + p.im };
      });
      return { id: s.id, amp_pk_mm_s: magnitude(v) * 1e3, phase_deg: lagDeg(v) };
    });
  }

  /**
   * Fills out[ch][offset .. offset+count) with the next `count` samples of every channel (volts).
   * Returns the number of tach edges in those samples; their fractional sample indices are in
   * `edges` (valid until the next call).
   */
  render(out: readonly Float32Array[], count: number, offset = 0): number {
    if (out.length < this.channelCount)
      throw new Error(`render needs ${this.channelCount} channel arrays, got ${out.length}`);
    for (let c = 0; c < this.channelCount; c++) {
      if (out[c]!.length < offset + count)
        throw new Error(
          `render: channel array ${c} holds ${out[c]!.length} samples, needs ${offset + count}`,
        );
    }
    this.edgeCount = 0;
    let done = 0;
    while (done < count) {
      if (this.subPos >= SUB_BLOCK) this.renderSubBlock();
      const n = Math.min(count - done, SUB_BLOCK - this.subPos);
      for (let c = 0; c < this.channelCount; c++) {
        const src = this.sub[c]!;
        const dst = out[c]!;
        const d0 = offset + done - this.subPos;
        for (let i = this.subPos; i < this.subPos + n; i++) dst[d0 + i] = src[i]!;
      }
      const lo = this.subStart + this.subPos;
      const hi = lo + n;
      for (let e = 0; e < this.subEdgeCount; e++) {
        const t = this.subEdges[e]!;
        if (t >= lo - 1 && t < hi - 1) this.pushEdge(t);
      }
      this.subPos += n;
      done += n;
      this.produced += n;
    }
    return this.edgeCount;
  }

  /** Tach edges of the last render() call, fractional sample indices from the simulation start. */
  get edges(): Float64Array {
    return this.edgeBuf.subarray(0, this.edgeCount);
  }

  private pushEdge(t: number): void {
    if (this.edgeCount === this.edgeBuf.length) {
      const grown = new Float64Array(this.edgeBuf.length * 2);
      grown.set(this.edgeBuf);
      this.edgeBuf = grown;
    }
    this.edgeBuf[this.edgeCount++] = t;
  }

  private currentGeometry(tc: number): RotorGeometry {
    const g = this.plan.geometry;
    const s = this.state;
    const b = (i: 0 | 1) => ({
      name: g.bearings[i].name,
      position_mm: g.bearings[i].position_mm,
      support: {
        vertical: s.support(i, 'vertical', tc),
        horizontal: s.support(i, 'horizontal', tc),
        axial: s.support(i, 'axial', tc),
      },
    });
    return { ...g, bearings: [b(0), b(1)] };
  }

  private forEachSyncTerm(
    geometry: RotorGeometry,
    sensorIndex: number,
    omega: number,
    tc: number,
    emit: (halfOrder: number, v: Phasor) => void,
  ): void {
    const speedRatio = omega / this.plan.ratedOmega;
    const place = this.plan.sensors[sensorIndex]!.place;
    for (const f of this.state.faults.values()) {
      syncTerms(
        f.spec,
        f.phases,
        { geometry, place, sensorIndex, speedRatio, factor: this.state.faultFactor(f, tc) },
        emit,
      );
    }
  }

  /** Rebuilds the tone list when faults came or went, keeping the phase of tones that stay. */
  private syncTones(): void {
    if (this.toneGeneration === this.state.faultGeneration) return;
    this.toneGeneration = this.state.faultGeneration;
    const old = new Map(this.tones.map((t) => [t.def.key, t]));
    const runs: { def: ToneDef; fault?: ActiveFault }[] = [];
    if (this.plan.blades > 0 && this.plan.bladePassPkMmS > 0)
      runs.push({
        def: bladePassTone(this.plan.blades, this.plan.bladePassPkMmS, this.bladeDraws),
      });
    for (const f of this.state.faults.values())
      for (const def of toneDefs(f.spec, this.plan.geometry, f.draws)) runs.push({ def, fault: f });
    const latest = this.toneCoefNext;
    const oldIndex = new Map(this.tones.map((t, i) => [t.def.key, i]));
    this.tones = runs.map((r) => ({ ...r, phase: old.get(r.def.key)?.phase ?? 0 }));
    const S = this.plan.sensors.length;
    this.toneCoefPrev = new Float64Array(this.tones.length * S * 2);
    this.toneCoefNext = new Float64Array(this.tones.length * S * 2);
    // a tone that stays keeps its latest amplitudes; a new one fades in from zero over one
    // sub-block
    this.tones.forEach((t, i) => {
      const j = oldIndex.get(t.def.key);
      if (j !== undefined)
        this.toneCoefNext.set(latest.subarray(j * S * 2, (j + 1) * S * 2), i * S * 2);
    });
  }

  /** Complex amplitudes (volts) of every sensor's orders and tones at signal time ts. */
  private evaluate(ts: number, omega: number, coef: Float64Array, toneCoef: Float64Array): void {
    const tc = this.state.scenarioTime(ts);
    const geometry = this.currentGeometry(tc);
    const u = this.state.unbalance(tc);
    const speedRatio = omega / this.plan.ratedOmega;
    coef.fill(0);
    const K = HALF_ORDERS + 1;
    this.plan.sensors.forEach((s, i) => {
      const k = s.v_per_g / STANDARD_GRAVITY_M_S2; // volts per m/s^2
      const addVel = (h: number, v: Phasor) => {
        // acceleration = i * (h/2) * omega * velocity
        const w = (h / 2) * omega * k;
        const o = (i * K + h) * 2;
        coef[o] += -v.im * w;
        coef[o + 1] += v.re * w;
      };
      addVel(2, unbalanceVelocity(geometry, s.place, u, omega));
      this.forEachSyncTerm(geometry, i, omega, tc, addVel);
      this.tones.forEach((t, j) => {
        const factor = t.fault ? this.state.faultFactor(t.fault, tc) : 1;
        const a = t.def.amplitude(s.place, i, omega, speedRatio, factor);
        const o = (j * this.plan.sensors.length + i) * 2;
        toneCoef[o] = a.re * k;
        toneCoef[o + 1] = a.im * k;
      });
    });
  }

  private renderSubBlock(): void {
    this.subStart += SUB_BLOCK;
    this.subPos = 0;
    const n0 = this.subStart;
    const tsEnd = (n0 + SUB_BLOCK - 1) * this.dt;
    this.state.advance(tsEnd);
    this.syncTones();
    const omegaEnd = this.state.omega(tsEnd);
    // the amplitudes at the end of the last sub-block start this one
    [this.coefPrev, this.coefNext] = [this.coefNext, this.coefPrev];
    [this.toneCoefPrev, this.toneCoefNext] = [this.toneCoefNext, this.toneCoefPrev];
    this.stepLooseness();
    this.evaluate(tsEnd, omegaEnd, this.coefNext, this.toneCoefNext);
    this.integrateAngle(n0, omegaEnd);
    this.synthesizeSensors();
    this.synthesizeTach(n0);
  }

  /** Moves each looseness fault's harmonic phases by a random walk (erratic phase). */
  private stepLooseness(): void {
    const revs = (this.omegaLast * SUB_BLOCK * this.dt) / TWO_PI;
    for (const f of this.state.faults.values()) {
      if (f.spec.kind !== 'looseness' || f.phases.length === 0) continue;
      const step = f.spec.jitter_deg * Math.sqrt(Math.max(revs, 0));
      for (let i = 0; i < f.phases.length; i++) f.phases[i] += step * this.rng.normal();
    }
  }

  private integrateAngle(n0: number, omegaEnd: number): void {
    const w0 = this.omegaLast;
    const dw = (omegaEnd - w0) / SUB_BLOCK;
    const dt = this.dt;
    let phi = this.phi;
    let prevW = w0;
    let turn = 0;
    for (let i = 0; i < SUB_BLOCK; i++) {
      const w = n0 === 0 && i === 0 ? w0 : w0 + dw * (i + 1);
      const d = n0 === 0 && i === 0 ? 0 : 0.5 * (prevW + w) * dt;
      phi += d;
      turn += d;
      if (phi >= FOUR_PI) phi -= FOUR_PI;
      this.omegaArr[i] = w;
      this.dphiArr[i] = d;
      this.phiArr[i] = phi;
      prevW = w;
    }
    this.phi = phi;
    this.subTurn = turn;
    this.omegaLast = omegaEnd;
  }

  private synthesizeSensors(): void {
    const S = this.plan.sensors.length;
    const K = HALF_ORDERS + 1;
    // which half orders any sensor uses in this sub-block
    let maxH = 0;
    for (let s = 0; s < S; s++) {
      for (let h = 1; h < K; h++) {
        const o = (s * K + h) * 2;
        const on =
          this.coefPrev[o] !== 0 ||
          this.coefPrev[o + 1] !== 0 ||
          this.coefNext[o] !== 0 ||
          this.coefNext[o + 1] !== 0;
        this.activeOrders[s * K + h] = on ? 1 : 0;
        if (on && h > maxH) maxH = h;
      }
    }
    // table of cos/sin(h * phi/2) for h = 1..maxH by the angle-addition recurrence
    const cosT = this.cosT;
    const sinT = this.sinT;
    for (let i = 0; i < SUB_BLOCK; i++) {
      const half = 0.5 * this.phiArr[i]!;
      const c1 = Math.cos(half);
      const s1 = Math.sin(half);
      let c = c1;
      let s = s1;
      cosT[SUB_BLOCK + i] = c;
      sinT[SUB_BLOCK + i] = s;
      for (let h = 2; h <= maxH; h++) {
        const cn = c * c1 - s * s1;
        s = s * c1 + c * s1;
        c = cn;
        cosT[h * SUB_BLOCK + i] = c;
        sinT[h * SUB_BLOCK + i] = s;
      }
    }
    // advance the tones once for all sensors. Each tone turns by order x (shaft turn in this
    // sub-block)
    // + 2 pi hz x duration; spread evenly over the samples (exact at steady speed; while the speed
    //   ramps
    // the shaft angle within a sub-block bends by micro-radians) by rotating a unit phasor, so the
    // sub-block costs two trig calls per tone instead of two per sample.
    const T = this.tones.length;
    const toneCos = this.toneScratch(T);
    for (let t = 0; t < T; t++) {
      const run = this.tones[t]!;
      const advance = run.def.order * this.subTurn + TWO_PI * run.def.hz * this.dt * SUB_BLOCK;
      const step = advance / SUB_BLOCK;
      const cr = Math.cos(step);
      const sr = Math.sin(step);
      let c = Math.cos(run.phase);
      let sn = Math.sin(run.phase);
      const base = t * SUB_BLOCK * 2;
      for (let i = 0; i < SUB_BLOCK; i++) {
        const cn = c * cr - sn * sr;
        sn = sn * cr + c * sr;
        c = cn;
        toneCos[base + i] = c;
        toneCos[base + SUB_BLOCK + i] = sn;
      }
      const ph = (run.phase + advance) % TWO_PI;
      run.phase = ph < 0 ? ph + TWO_PI : ph;
    }

    const inv = 1 / SUB_BLOCK;
    const noise = this.noise;
    const mask = (1 << NOISE_TABLE_BITS) - 1;
    let x = this.noiseState;
    for (let s = 0; s < S; s++) {
      const sensor = this.plan.sensors[s]!;
      const acc = this.acc;
      acc.fill(0);
      for (let h = 1; h <= maxH; h++) {
        if (this.activeOrders[s * K + h] === 0) continue;
        const o = (s * K + h) * 2;
        const re0 = this.coefPrev[o]!;
        const im0 = this.coefPrev[o + 1]!;
        const dre = (this.coefNext[o]! - re0) * inv;
        const dim = (this.coefNext[o + 1]! - im0) * inv;
        const row = h * SUB_BLOCK;
        for (let i = 0; i < SUB_BLOCK; i++) {
          const f = i + 1;
          acc[i] += (re0 + dre * f) * cosT[row + i]! - (im0 + dim * f) * sinT[row + i]!;
        }
      }
      for (let t = 0; t < T; t++) {
        const o = (t * S + s) * 2;
        const re0 = this.toneCoefPrev[o]!;
        const im0 = this.toneCoefPrev[o + 1]!;
        const re1 = this.toneCoefNext[o]!;
        const im1 = this.toneCoefNext[o + 1]!;
        if (re0 === 0 && im0 === 0 && re1 === 0 && im1 === 0) continue;
        const dre = (re1 - re0) * inv;
        const dim = (im1 - im0) * inv;
        const base = t * SUB_BLOCK * 2;
        for (let i = 0; i < SUB_BLOCK; i++) {
          const f = i + 1;
          acc[i] +=
            (re0 + dre * f) * toneCos[base + i]! - (im0 + dim * f) * toneCos[base + SUB_BLOCK + i]!;
        }
      }
      // bias, noise, sensor fault, board range
      const out = this.sub[sensor.channel]!;
      const noiseV = this.plan.noiseRmsG * sensor.v_per_g;
      const bias = sensor.bias_v;
      const fault = this.state.sensorFaults.get(s);
      // board input range (doubles kept apart from the optional config value so the loops stay
      // unboxed)
      const hi = sensor.full_scale_v === undefined ? Infinity : sensor.full_scale_v;
      const lo = -hi;
      if (!fault) {
        for (let i = 0; i < SUB_BLOCK; i++) {
          x ^= x << 13;
          x ^= x >>> 17;
          x ^= x << 5;
          const v = bias + acc[i]! + noiseV * noise[x & mask]!;
          out[i] = Math.min(hi, Math.max(lo, v));
        }
      } else if (fault.kind === 'clipping') {
        const lim = fault.limit_v === undefined ? Infinity : fault.limit_v;
        const gain = fault.gain;
        for (let i = 0; i < SUB_BLOCK; i++) {
          x ^= x << 13;
          x ^= x >>> 17;
          x ^= x << 5;
          const v =
            bias + Math.min(lim, Math.max(-lim, gain * (acc[i]! + noiseV * noise[x & mask]!)));
          out[i] = Math.min(hi, Math.max(lo, v));
        }
      } else if (fault.kind === 'flat') {
        out.fill(Math.min(hi, Math.max(lo, bias)));
      } else {
        // open cable reads just below the supply, a short just above 0 V; a little electrical noise
        // on both
        const level = fault.kind === 'open' ? this.plan.supplyV - 0.3 : 0.01;
        for (let i = 0; i < SUB_BLOCK; i++) {
          x ^= x << 13;
          x ^= x >>> 17;
          x ^= x << 5;
          const v = level + 0.001 * noise[x & mask]!;
          out[i] = Math.min(hi, Math.max(lo, v));
        }
      }
    }
    this.noiseState = x;
  }

  private toneScratch(tones: number): Float64Array {
    if (this.toneBuf.length < tones * SUB_BLOCK * 2)
      this.toneBuf = new Float64Array(tones * SUB_BLOCK * 2);
    return this.toneBuf;
  }

  private synthesizeTach(n0: number): void {
    const tach = this.plan.tach;
    const out = this.sub[tach.channel]!;
    const pitch = TWO_PI / tach.pulses_per_rev;
    const halfPitch = pitch / 2;
    const width = Math.min(tach.mark_width_rad, halfPitch);
    const span = tach.high_v - tach.low_v;
    const noiseV = tach.noise_rms_v;
    const noise = this.noise;
    const mask = (1 << NOISE_TABLE_BITS) - 1;
    let x = this.noiseState;
    const fault = this.state.tachFault;
    this.subEdgeCount = 0;
    for (let i = 0; i < SUB_BLOCK; i++) {
      const phi = this.phiArr[i]!;
      // angle since the nearest mark, in [-pitch/2, pitch/2); continuous across the 4 pi wrap of
      // phi
      let psi = phi % pitch;
      if (psi >= halfPitch) psi -= pitch;
      // a pulse is kept or dropped as a whole: decide half a pitch before each mark
      if (psi < this.lastPsi) {
        this.pulsePresent =
          !fault || (fault.kind === 'intermittent' && this.rng.uniform() >= fault.missing_fraction);
      }
      this.lastPsi = psi;
      let level = 0;
      if (this.pulsePresent) {
        const ramp = Math.max(this.omegaArr[i]! * tach.rise_s, 1e-12);
        const up = 0.5 + psi / ramp;
        const down = 0.5 + (width - psi) / ramp;
        level = up < down ? up : down;
        level = level < 0 ? 0 : level > 1 ? 1 : level;
        // mark crossing between the previous sample and this one (the angle passes a multiple of
        // pitch)
        const d = this.dphiArr[i]!;
        if (d > 0 && psi >= 0 && psi < d && n0 + i > 0) {
          const frac = 1 - psi / d;
          if (this.subEdgeCount < this.subEdges.length)
            this.subEdges[this.subEdgeCount++] = n0 + i - 1 + frac;
        }
      }
      x ^= x << 13;
      x ^= x >>> 17;
      x ^= x << 5;
      out[i] = tach.low_v + span * level + noiseV * noise[x & mask]!;
    }
    this.noiseState = x;
  }
}
