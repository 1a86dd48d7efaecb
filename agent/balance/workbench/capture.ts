/**
 * Capturing one balancing run from the live 1x vectors: wait until the live average has forgotten
 * what came before (the weight change, the run-up), then average the live vectors over N
 * revolutions at steady speed. A speed change beyond the tolerance restarts the averaging (and is
 * flagged); a tach that stops delivering revolutions pauses it. Pure: frames in, progress and a
 * result out.
 *
 * The live vectors are themselves averages over the last few dozen revolutions with exponential
 * forgetting (agent/dsp: LiveFrame), so consecutive frames overlap. Each frame is weighted by the
 * revolutions that passed since the previous one, so the mean covers the N revolutions evenly.
 * Amplitudes are mm/s peak; phase is the lag from the tach edge to the 1x peak, degrees.
 */
import type { LiveConfig } from '../../config/live.js';
import type { LiveFrame } from '../../dsp/types.js';

export interface CaptureSettings {
  /** Revolutions averaged. */
  readonly revolutions: number;
  /** Revolutions skipped first, for the live average to settle. */
  readonly settleRevolutions: number;
  /** Speed change that restarts the averaging, % of the speed it started at. */
  readonly speedTolerancePct: number;
  /** Restarts after speed changes before the capture gives up. */
  readonly maxRestarts: number;
  /**
   * A frame whose last trusted revolution is older than this (or than three revolutions) is not
   * used, s.
   */
  readonly maxAgeS: number;
  /**
   * Vector scatter (r.m.s. distance of the frames from their mean, % of the mean) that is
   * flagged ...
   */
  readonly scatterWarnPct: number;
  /**
   * ... when it is also above this, mm/s pk (a tiny residual vector always scatters by a large
   * share of itself).
   */
  readonly scatterFloorMmS: number;
}

/**
 * The capture settings of the `live.capture` config section. `liveRevolutions` is the memory of the
 * runtime's live average (AgentRuntime liveRevolutions); without settle_revolutions the capture
 * skips five times that, for the average to forget what came before.
 */
export function captureSettingsFrom(
  capture: LiveConfig['capture'],
  liveRevolutions = 32,
): CaptureSettings {
  return {
    revolutions: capture.revolutions,
    settleRevolutions: capture.settle_revolutions ?? 5 * liveRevolutions,
    speedTolerancePct: capture.speed_tolerance_pct,
    maxRestarts: capture.max_restarts,
    maxAgeS: 2,
    scatterWarnPct: 10,
    scatterFloorMmS: 0.05,
  };
}

export interface CaptureReading {
  readonly amp_pk_mm_s: number;
  readonly phase_deg: number;
  /** r.m.s. distance of the live vectors from their mean over the run, mm/s pk ... */
  readonly scatter_pk_mm_s: number;
  /** ... and as % of the mean's amplitude. */
  readonly scatter_pct: number;
}

export interface CaptureResult {
  readonly readings: Readonly<Record<string, CaptureReading>>;
  readonly speed_rpm: number;
  readonly speed_min_rpm: number;
  readonly speed_max_rpm: number;
  readonly revolutions: number;
  readonly frames: number;
  readonly restarts: number;
  /** Plain-language notes about the run (speed changes, pauses, unsteady vectors). */
  readonly notes: readonly string[];
}

export type CapturePhase = 'settling' | 'measuring' | 'done' | 'failed';

export interface CaptureProgress {
  readonly phase: CapturePhase;
  readonly settled_revolutions: number;
  readonly settle_revolutions: number;
  readonly measured_revolutions: number;
  readonly revolutions: number;
  readonly speed_rpm: number | null;
  readonly restarts: number;
  /** Why the capture is waiting (no speed, tach lost), or why it failed. */
  readonly waiting: string | null;
  readonly notes: readonly string[];
}

const D2R = Math.PI / 180;

function fmt(x: number, d = 1): string {
  return x.toFixed(d);
}

export class RunCapture {
  private phase: CapturePhase = 'settling';
  private prevAt: number | null = null;
  private prevIndex: number | null = null;
  private settled = 0;
  private measured = 0;
  private refSpeed: number | null = null;
  private restarts = 0;
  private waiting: string | null = null;
  private unsteady: string | null = null;
  private failure: string | null = null;
  private readonly notes: string[] = [];
  private sumRe: Float64Array;
  private sumIm: Float64Array;
  private frameVecs: Array<{ w: number; re: Float64Array; im: Float64Array }> = [];
  private speedSum = 0;
  private speedMin = Infinity;
  private speedMax = -Infinity;
  private resultValue: CaptureResult | null = null;

  constructor(
    readonly sensors: readonly string[],
    readonly settings: CaptureSettings,
  ) {
    if (sensors.length === 0) throw new Error('RunCapture needs at least one sensor');
    this.sumRe = new Float64Array(sensors.length);
    this.sumIm = new Float64Array(sensors.length);
    if (settings.settleRevolutions <= 0) this.phase = 'measuring';
  }

  get result(): CaptureResult | null {
    return this.resultValue;
  }

  get failed(): string | null {
    return this.failure;
  }

  get finished(): boolean {
    return this.phase === 'done' || this.phase === 'failed';
  }

  progress(): CaptureProgress {
    return {
      phase: this.phase,
      settled_revolutions: Math.min(this.settled, this.settings.settleRevolutions),
      settle_revolutions: this.settings.settleRevolutions,
      measured_revolutions: Math.min(this.measured, this.settings.revolutions),
      revolutions: this.settings.revolutions,
      speed_rpm: this.refSpeed,
      restarts: this.restarts,
      waiting: this.failure ?? this.waiting ?? this.unsteady,
      notes: [...this.notes],
    };
  }

  /** Feeds one live frame; `atMs` is its time on the sample clock (ms). */
  push(frame: LiveFrame, atMs: number): CaptureProgress {
    if (this.finished) return this.progress();
    const prev = this.prevAt;
    const prevIndex = this.prevIndex;
    this.prevAt = atMs;
    this.prevIndex = frame.sample_index;
    const speed = frame.speed_rpm;
    // A slow fan turns less often: allow three revolutions' time as well.
    const maxAge =
      speed !== null && speed > 0
        ? Math.max(this.settings.maxAgeS, 180 / speed)
        : this.settings.maxAgeS;
    if (speed === null || !(speed > 0) || frame.age_s > maxAge) {
      this.waiting =
        speed === null
          ? 'no speed yet: is the fan turning and the tach pickup seeing its mark?'
          : `no trusted revolution for ${fmt(Math.min(frame.age_s, 9999))} s: ` +
            `tach lost or fan stopped`;
      this.restartSettling(null);
      return this.progress();
    }
    if (this.waiting !== null) {
      this.waiting = null;
      return this.progress(); // the first good frame after a pause only marks the time
    }
    this.refSpeed ??= speed;
    // Elapsed time from the sample clock when the frame says its rate: the wall-clock time on live
    // frames is re-anchored after a board restart or a wall-clock step, and must not count
    // revolutions.
    const fs = frame.sample_rate_hz;
    const elapsedS =
      fs !== undefined && fs > 0 && prevIndex !== null
        ? (frame.sample_index - prevIndex) / fs
        : prev === null
          ? 0
          : (atMs - prev) / 1000;
    if (!(elapsedS > 0)) return this.progress();
    const revs = (elapsedS / 60) * speed;
    const ref = this.refSpeed;
    const changePct = (Math.abs(speed - ref) / ref) * 100;
    if (changePct > this.settings.speedTolerancePct) {
      if (this.phase === 'measuring' && this.measured > 0) {
        this.restarts++;
        this.notes.push(
          `speed changed from ${fmt(ref, 0)} to ${fmt(speed, 0)} r/min ` +
            `(${fmt(changePct)} %) during the averaging: restarted`,
        );
        if (this.restarts > this.settings.maxRestarts) {
          return this.fail(
            `the speed kept changing (${this.restarts} restarts, ` +
              `last ${fmt(ref, 0)} -> ${fmt(speed, 0)} r/min): hold ` +
              `the fan at a steady speed and capture the run again`,
          );
        }
      }
      this.restartSettling(speed);
      this.unsteady =
        `speed changing (${fmt(ref, 0)} -> ${fmt(speed, 0)} r/min): waiting ` +
        `for it to hold within ${fmt(this.settings.speedTolerancePct)} %`;
      return this.progress();
    }
    this.unsteady = null;

    if (this.phase === 'settling') {
      this.settled += revs;
      if (this.settled >= this.settings.settleRevolutions) this.phase = 'measuring';
      return this.progress();
    }

    // Measuring.
    const re = new Float64Array(this.sensors.length);
    const im = new Float64Array(this.sensors.length);
    for (let k = 0; k < this.sensors.length; k++) {
      const id = this.sensors[k]!;
      const v = frame.channels.find((c) => c.id === id)?.orders['1'];
      if (!v || !Number.isFinite(v.amp_pk_mm_s) || !Number.isFinite(v.phase_deg)) {
        return this.fail(
          `no 1x vector for ${id} in the live data: check the sensor (the ` +
            `live page shows whether it is OK), or leave it out of the job`,
        );
      }
      re[k] = v.amp_pk_mm_s * Math.cos(v.phase_deg * D2R);
      im[k] = v.amp_pk_mm_s * Math.sin(v.phase_deg * D2R);
      this.sumRe[k]! += revs * re[k]!;
      this.sumIm[k]! += revs * im[k]!;
    }
    this.frameVecs.push({ w: revs, re, im });
    this.measured += revs;
    this.speedSum += revs * speed;
    this.speedMin = Math.min(this.speedMin, speed);
    this.speedMax = Math.max(this.speedMax, speed);
    if (this.measured >= this.settings.revolutions) this.finish();
    return this.progress();
  }

  /** Ends the capture from outside (cancelled by the technician, source stopped). */
  cancel(why: string): void {
    if (!this.finished) this.fail(why);
  }

  private restartSettling(speed: number | null): void {
    this.refSpeed = speed;
    this.settled = 0;
    this.measured = 0;
    this.sumRe.fill(0);
    this.sumIm.fill(0);
    this.frameVecs = [];
    this.speedSum = 0;
    this.speedMin = Infinity;
    this.speedMax = -Infinity;
    this.phase = this.settings.settleRevolutions > 0 ? 'settling' : 'measuring';
  }

  private fail(why: string): CaptureProgress {
    this.phase = 'failed';
    this.failure = why;
    return this.progress();
  }

  private finish(): void {
    const W = this.measured;
    const readings: Record<string, CaptureReading> = {};
    this.sensors.forEach((id, k) => {
      const mRe = this.sumRe[k]! / W;
      const mIm = this.sumIm[k]! / W;
      const amp = Math.hypot(mRe, mIm);
      let dev = 0;
      for (const f of this.frameVecs) dev += f.w * ((f.re[k]! - mRe) ** 2 + (f.im[k]! - mIm) ** 2);
      const spread = Math.sqrt(dev / W);
      const scatter = amp > 0 ? (spread / amp) * 100 : 0;
      let phase = Math.atan2(mIm, mRe) / D2R;
      if (phase < 0) phase += 360;
      readings[id] = {
        amp_pk_mm_s: amp,
        phase_deg: phase >= 360 ? 0 : phase,
        scatter_pk_mm_s: spread,
        scatter_pct: scatter,
      };
      if (scatter > this.settings.scatterWarnPct && spread > this.settings.scatterFloorMmS) {
        this.notes.push(
          `the 1x vector at ${id} was unsteady during the run (scatter ${fmt(scatter)} % ` +
            `of its amplitude): load, speed or a loose sensor; consider repeating the run`,
        );
      }
    });
    this.resultValue = {
      readings,
      speed_rpm: this.speedSum / W,
      speed_min_rpm: this.speedMin,
      speed_max_rpm: this.speedMax,
      revolutions: W,
      frames: this.frameVecs.length,
      restarts: this.restarts,
      notes: [...this.notes],
    };
    this.phase = 'done';
  }
}
