/**
 * Facts about the shape of one channel's raw volts over a window, for the sensor-fault rules
 * (agent/watcher/health.ts): impulses and whether they ring, samples piling up at an extreme value,
 * the converter step, and sudden level steps. Streaming, one pass per block plus one short pass for
 * the extremes; every buffer is allocated when the stage is built (no per-sample allocation).
 *
 * The window is cut into short spans (10 ms by default). Per span the stage keeps the sum, the sum
 * of squares and the extremes; at the end of the window:
 * - the robust level is the median span r.m.s. (about the window mean): impulses a few times a
 *   second leave most spans untouched, so they do not lift it, unlike the plain r.m.s.;
 * - an impulse is a span whose largest excursion reaches `spikeRatio` x that level while neither
 *   neighbouring span does (impulses are short; a level step is not one); it is one-sided
 *   when the excursion on one side is at least `oneSidedRatio` x the one on the other side. An
 *   impact ringing a structural resonance (a bearing defect, a rub) swings both ways within
 *   fractions of a millisecond; a connector or cable fault jumps one way and comes back without
 *   ringing (common practice);
 * - spans are grouped into 100 ms groups for level steps: the largest and smallest group r.m.s.
 *   against the median, and the largest ratio between neighbouring groups.
 */

export interface SignalFacts {
  /** Largest |x - mean| over the r.m.s. about the mean. */
  readonly crest_factor: number;
  /** Fourth central moment over the squared variance: 3 for Gaussian noise, 1.5 for a sine. */
  readonly kurtosis: number;
  /**
   * Smallest non-zero step between neighbouring samples, volts (the converter step for quantised
   * data); null when the signal never moved.
   */
  readonly min_step_v: number | null;
  /**
   * (max - min) / min_step_v: how many converter steps the signal spans; null with min_step_v null.
   */
  readonly steps_spanned: number | null;
  /** Span length, s. */
  readonly span_s: number;
  /** Median r.m.s. of the spans about the window mean, volts (the robust level). */
  readonly span_rms_median_v: number;
  /**
   * Spans whose largest excursion reaches spike_ratio x the robust level while neither neighbour
   * does.
   */
  readonly impulses: number;
  /**
   * Of those, the spans with the excursion on one side at least one_sided_ratio x the other side.
   */
  readonly impulses_one_sided: number;
  /** Largest excursion from the mean over the robust level. */
  readonly peak_over_level: number;
  /** Length of a level group, s. */
  readonly group_s: number;
  readonly groups: number;
  readonly group_rms_median_v: number;
  readonly group_rms_max_v: number;
  readonly group_rms_min_v: number;
  /** Largest ratio (>= 1) between the r.m.s. of neighbouring groups. */
  readonly group_jump_ratio: number;
  /**
   * The highest value, the samples within a small tolerance of it, and the samples in the band just
   * below.
   */
  readonly pile_high: PileUp;
  readonly pile_low: PileUp;
}

export interface PileUp {
  readonly v: number;
  /**
   * Samples within tol of the extreme (tol = the larger of 0.1 % of the range and 1.5 converter
   * steps).
   */
  readonly samples: number;
  /**
   * Samples between 3 tol and tol from it: few when the signal is cut off there, about as many as
   * `samples` otherwise.
   */
  readonly below: number;
}

export interface SignalFactsOptions {
  readonly sampleRate: number;
  /** Samples a window may hold (more halves the span resolution, never the data). */
  readonly maxWindowSamples: number;
  readonly spikeRatio: number;
  readonly oneSidedRatio: number;
  readonly spanS?: number;
  readonly groupS?: number;
}

/** Tolerance of "at the extreme", as a share of the signal's range. */
const PILE_TOL_SHARE = 1e-3;

export class SignalFactsStage {
  private readonly spSum: Float64Array;
  private readonly spSq: Float64Array;
  private readonly spMax: Float64Array;
  private readonly spMin: Float64Array;
  private readonly spN: Float64Array;
  private readonly scratch: Float64Array;
  private readonly groupScratch: Float64Array;
  private readonly cap: number;
  private readonly baseSpan: number;
  private spanLen: number;
  private spans = 0;
  private curN = 0;
  private curSum = 0;
  private curSq = 0;
  private curMax = -Infinity;
  private curMin = Infinity;
  private shift = 0;
  private n = 0;
  private s1 = 0;
  private s2 = 0;
  private s3 = 0;
  private s4 = 0;
  private mx = -Infinity;
  private mn = Infinity;
  private prev = NaN;
  private minStep = Infinity;
  private hi = -Infinity;
  private hiTop = 0;
  private hiBelow = 0;
  private lo = Infinity;
  private loTop = 0;
  private loBelow = 0;

  constructor(private readonly o: SignalFactsOptions) {
    this.baseSpan = Math.max(8, Math.round(o.sampleRate * (o.spanS ?? 0.01)));
    this.spanLen = this.baseSpan;
    this.cap = Math.min(1 << 17, Math.ceil(o.maxWindowSamples / this.baseSpan) + 8);
    this.spSum = new Float64Array(this.cap);
    this.spSq = new Float64Array(this.cap);
    this.spMax = new Float64Array(this.cap);
    this.spMin = new Float64Array(this.cap);
    this.spN = new Float64Array(this.cap);
    this.scratch = new Float64Array(this.cap + 1);
    this.groupScratch = new Float64Array(this.cap + 1);
  }

  /** Adds one block of volts. */
  add(x: Float32Array): void {
    const len = x.length;
    if (len === 0) return;
    if (this.n === 0) this.shift = x[0]!;
    const shift = this.shift;
    let s1 = 0;
    let s2 = 0;
    let s3 = 0;
    let s4 = 0;
    let mx = this.mx;
    let mn = this.mn;
    let prev = this.prev;
    let minStep = this.minStep;
    let i = 0;
    while (i < len) {
      // One stretch up to the end of the current span, with the span's sums in locals.
      const start = i;
      const end = Math.min(len, i + (this.spanLen - this.curN));
      let cs = 0;
      let cq = 0;
      let cmx = this.curMax;
      let cmn = this.curMin;
      for (; i < end; i++) {
        const v = x[i]!;
        const d = v - shift;
        const d2 = d * d;
        cs += d;
        cq += d2;
        s3 += d2 * d;
        s4 += d2 * d2;
        if (v > cmx) cmx = v;
        if (v < cmn) cmn = v;
        const step = v > prev ? v - prev : prev - v;
        if (step > 0 && step < minStep) minStep = step;
        prev = v;
      }
      s1 += cs;
      s2 += cq;
      if (cmx > mx) mx = cmx;
      if (cmn < mn) mn = cmn;
      this.curSum += cs;
      this.curSq += cq;
      this.curMax = cmx;
      this.curMin = cmn;
      this.curN += end - start;
      if (this.curN === this.spanLen) this.closeSpan();
    }
    this.s1 += s1;
    this.s2 += s2;
    this.s3 += s3;
    this.s4 += s4;
    this.n += len;
    this.mx = mx;
    this.mn = mn;
    this.prev = prev;
    this.minStep = minStep;
    this.extremes(x);
  }

  /** Counts this block's samples at and just below the window's extremes (a second, short pass). */
  private extremes(x: Float32Array): void {
    const range = this.mx - this.mn;
    const tol = Math.max(
      PILE_TOL_SHARE * range,
      Number.isFinite(this.minStep) ? 1.5 * this.minStep : 0,
      1e-12,
    );
    // A new extreme more than tol beyond the old one starts the count afresh.
    if (this.mx > this.hi + tol) {
      this.hiTop = 0;
      this.hiBelow = 0;
    }
    if (this.mn < this.lo - tol) {
      this.loTop = 0;
      this.loBelow = 0;
    }
    this.hi = this.mx;
    this.lo = this.mn;
    const hiTop = this.hi - tol;
    const hiBelow = this.hi - 3 * tol;
    const loTop = this.lo + tol;
    const loBelow = this.lo + 3 * tol;
    let a = 0;
    let b = 0;
    let c = 0;
    let d = 0;
    for (let i = 0; i < x.length; i++) {
      const v = x[i]!;
      if (v >= hiTop) a++;
      else if (v >= hiBelow) b++;
      if (v <= loTop) c++;
      else if (v <= loBelow) d++;
    }
    this.hiTop += a;
    this.hiBelow += b;
    this.loTop += c;
    this.loBelow += d;
  }

  private closeSpan(): void {
    if (this.spans === this.cap) this.mergePairs();
    const k = this.spans++;
    this.spSum[k] = this.curSum;
    this.spSq[k] = this.curSq;
    this.spMax[k] = this.curMax;
    this.spMin[k] = this.curMin;
    this.spN[k] = this.curN;
    this.curN = 0;
    this.curSum = 0;
    this.curSq = 0;
    this.curMax = -Infinity;
    this.curMin = Infinity;
  }

  /** Halves the span resolution in place when a window outgrows the buffers. */
  private mergePairs(): void {
    const half = this.spans >> 1;
    for (let i = 0; i < half; i++) {
      const a = 2 * i;
      const b = a + 1;
      this.spSum[i] = this.spSum[a]! + this.spSum[b]!;
      this.spSq[i] = this.spSq[a]! + this.spSq[b]!;
      this.spMax[i] = Math.max(this.spMax[a]!, this.spMax[b]!);
      this.spMin[i] = Math.min(this.spMin[a]!, this.spMin[b]!);
      this.spN[i] = this.spN[a]! + this.spN[b]!;
    }
    if (this.spans % 2) {
      const last = this.spans - 1;
      this.spSum[half] = this.spSum[last]!;
      this.spSq[half] = this.spSq[last]!;
      this.spMax[half] = this.spMax[last]!;
      this.spMin[half] = this.spMin[last]!;
      this.spN[half] = this.spN[last]!;
      this.spans = half + 1;
    } else this.spans = half;
    this.spanLen *= 2;
  }

  get samples(): number {
    return this.n;
  }

  /** The facts over everything since the last reset; null before any sample. */
  facts(): SignalFacts | null {
    const n = this.n;
    if (n === 0) return null;
    if (this.curN >= this.spanLen / 2) this.closeSpan();
    const m = this.s1 / n; // mean of d
    const mean = this.shift + m;
    const varc = Math.max(0, this.s2 / n - m * m);
    const m4 = this.s4 / n - 4 * m * (this.s3 / n) + 6 * m * m * (this.s2 / n) - 3 * m ** 4;
    const rms = Math.sqrt(varc);
    const peak = Math.max(this.mx - mean, mean - this.mn);

    const spans = this.spans;
    const sc = this.scratch;
    let used = 0;
    for (let i = 0; i < spans; i++) {
      const sn = this.spN[i]!;
      if (sn === 0) continue;
      sc[used++] = Math.sqrt(
        Math.max(0, (this.spSq[i]! - 2 * m * this.spSum[i]! + sn * m * m) / sn),
      );
    }
    const level = used ? medianInPlace(sc, used) : rms;
    let impulses = 0;
    let oneSided = 0;
    const limit = this.o.spikeRatio * level;
    const over = (i: number): boolean =>
      i >= 0 &&
      i < spans &&
      this.spN[i]! > 0 &&
      limit > 0 &&
      Math.max(this.spMax[i]! - mean, mean - this.spMin[i]!) >= limit;
    for (let i = 0; i < spans; i++) {
      // An impulse is short: its span stands out and both neighbours do not (a level step is not an
      // impulse).
      if (!over(i) || over(i - 1) || over(i + 1)) continue;
      const up = this.spMax[i]! - mean;
      const dn = mean - this.spMin[i]!;
      impulses++;
      if (Math.max(up, dn) >= this.o.oneSidedRatio * Math.max(Math.min(up, dn), 0)) oneSided++;
    }

    // Level groups of about groupS.
    const spanS = this.spanLen / this.o.sampleRate;
    const per = Math.max(1, Math.round((this.o.groupS ?? 0.1) / spanS));
    const g = this.groupScratch;
    let groups = 0;
    let gMax = 0;
    let gMin = Infinity;
    let jump = 1;
    let prevG = NaN;
    for (let i = 0; i < spans; i += per) {
      let sq = 0;
      let sum = 0;
      let cnt = 0;
      for (let j = i; j < Math.min(spans, i + per); j++) {
        sq += this.spSq[j]!;
        sum += this.spSum[j]!;
        cnt += this.spN[j]!;
      }
      if (cnt < (per * this.spanLen) / 2) continue; // a short last group says little
      const r = Math.sqrt(Math.max(0, (sq - 2 * m * sum + cnt * m * m) / cnt));
      g[groups++] = r;
      if (r > gMax) gMax = r;
      if (r < gMin) gMin = r;
      if (!Number.isNaN(prevG)) {
        const a = Math.max(r, prevG);
        const b = Math.min(r, prevG);
        const ratio = b > 0 ? a / b : a > 0 ? 1e9 : 1; // finite, so the facts survive JSON
        if (ratio > jump) jump = ratio;
      }
      prevG = r;
    }
    const gMedian = groups ? medianInPlace(g, groups) : rms;
    const minStep = Number.isFinite(this.minStep) ? this.minStep : null;
    return {
      crest_factor: rms > 0 ? peak / rms : 0,
      kurtosis: varc > 0 ? m4 / (varc * varc) : 0,
      min_step_v: minStep,
      steps_spanned: minStep === null ? null : (this.mx - this.mn) / minStep,
      span_s: spanS,
      span_rms_median_v: level,
      impulses,
      impulses_one_sided: oneSided,
      peak_over_level: level > 0 ? peak / level : 0,
      group_s: per * spanS,
      groups,
      group_rms_median_v: gMedian,
      group_rms_max_v: groups ? gMax : 0,
      group_rms_min_v: groups ? gMin : 0,
      group_jump_ratio: jump,
      pile_high: { v: this.hi, samples: this.hiTop, below: this.hiBelow },
      pile_low: { v: this.lo, samples: this.loTop, below: this.loBelow },
    };
  }

  reset(): void {
    this.spans = 0;
    this.spanLen = this.baseSpan;
    this.curN = 0;
    this.curSum = 0;
    this.curSq = 0;
    this.curMax = -Infinity;
    this.curMin = Infinity;
    this.n = 0;
    this.s1 = this.s2 = this.s3 = this.s4 = 0;
    this.mx = -Infinity;
    this.mn = Infinity;
    this.prev = NaN;
    this.minStep = Infinity;
    this.hi = -Infinity;
    this.lo = Infinity;
    this.hiTop = this.hiBelow = this.loTop = this.loBelow = 0;
  }
}

/** Median of the first `n` values of `a`, sorting them in place. */
function medianInPlace(a: Float64Array, n: number): number {
  const v = a.subarray(0, n).sort();
  const h = n >> 1;
  return n % 2 ? v[h]! : (v[h - 1]! + v[h]!) / 2;
}
