/**
 * Decimation ahead of the spectrum: a cascade of half-band FIR low-pass filters, each halving the
 * sample rate, so the averaged spectrum (which only needs the band up to dsp.band_hz.high, 1 kHz by
 * default) is computed at a few kHz instead of the full acquisition rate. The synchronous averaging
 * does not pass through here: it keeps the full-rate samples.
 *
 * Design of one stage (input rate r, band edge B, attenuation A dB, delta = 10^(-A/20)):
 * - Half-band: the ideal cut-off is r/4, the impulse response has 4K-1 taps, the centre tap is 1/2
 *   and every other tap is exactly zero, so a stage costs K multiplications per output sample (the
 *   K non-zero taps on either side are pairwise equal: linear phase) plus the centre one.
 * - Passband [0, B], stopband [r/2 - B, r/2]. The stopband edge is where aliasing starts to matter:
 *   decimating by 2 folds f onto r/2 - f, which falls inside [0, B] exactly when f >= r/2 - B.
 *   Content between B and r/2 - B folds above B and is never summed into the band; the next stage's
 *   own stopband then starts from its own fold point.
 * - Taps: the ideal half-band response sin(pi m / 2) / (pi m) times a Kaiser window
 *   I0(beta sqrt(1 - (m / (2K-1))^2)) / I0(beta), m = -(2K-1) .. 2K-1; the non-centre taps are then
 *   scaled so that the gain is exactly 1 at DC (and, by the half-band symmetry A(f) + A(r/2 - f) = 1
 *   of the zero-phase amplitude A, exactly 0 at r/2).
 * - K is the smallest for which some beta meets the spec: |A(f) - 1| <= delta on [0, B] (passband
 *   ripple) and |A(f)| <= delta on [r/2 - B, r/2] (stopband attenuation >= A dB); beta is searched
 *   for each K, the response is checked on a dense grid. The symmetry makes the passband ripple and
 *   the stopband gain the same number, so one is checked and both are reported.
 *
 * Stages are added while the output rate stays at or above `minOutputRateHz` (the analyzer uses
 * 2.56 x the band edge), so 25.6 kHz with a 1 kHz band gives three stages and 3.2 kHz; a source that
 * is already slow gets no stage at all. With the default 120 dB, the passband gain of the whole
 * cascade is within 3e-6 of 1 (three stages of at most 1e-6 each): well below anything the overall
 * can show, so the spectrum needs no passband correction.
 *
 * Processing is streaming and block-size independent: each stage keeps its last 4K-2 inputs (and an
 * odd leftover) across calls and only computes the outputs that are kept (polyphase: one output per
 * two inputs, zero taps skipped). An output is only produced once the stage has seen a whole
 * window of real input, so nothing is made from the zeros before a start or a gap.
 */

/** Default stopband attenuation, dB: about the dynamic range of a 24-bit acquisition front end. */
export const DEFAULT_ATTENUATION_DB = 120;

/** Input samples per pass through the stages: one channel's stage buffers stay near 16 KB, in L1 cache. */
const CHUNK = 1024;

/** Longest half-band considered, K (4K-1 taps); a spec that needs more is refused. */
const MAX_HALF_LENGTH = 64;

/** Grid points over the passband for the search and for the final check. */
const SEARCH_GRID = 128;
const CHECK_GRID = 2048;

export interface HalfBandStageDesign {
  /** Sample rate into the stage, Hz; the stage outputs half of it. */
  readonly inputRateHz: number;
  /** Passband edge, Hz. */
  readonly passbandEdgeHz: number;
  /** Stopband edge (= inputRateHz / 2 - passbandEdgeHz): where aliases into the passband begin, Hz. */
  readonly stopbandEdgeHz: number;
  /** Impulse response, 4K-1 taps, symmetric, centre tap 1/2, taps at even distance from it 0. */
  readonly taps: Float64Array;
  /** Kaiser window shape parameter of the design. */
  readonly kaiserBeta: number;
  /** Largest |A(f) - 1| over the passband (= largest |A(f)| over the stopband). */
  readonly ripple: number;
  /** -20 log10(ripple): the stopband attenuation reached, dB. */
  readonly attenuationDb: number;
}

/** Zeroth-order modified Bessel function of the first kind, I0(x), by its power series. */
export function besselI0(x: number): number {
  const q = (x * x) / 4;
  let term = 1;
  let sum = 1;
  for (let k = 1; k < 500; k++) {
    term *= q / (k * k);
    sum += term;
    if (term < 1e-17 * sum) break;
  }
  return sum;
}

/** Half-band taps of length 4K-1 with a Kaiser window of shape `beta`, unity gain at DC. */
export function kaiserHalfBandTaps(halfLength: number, beta: number): Float64Array {
  const c = 2 * halfLength - 1;
  const h = new Float64Array(2 * c + 1);
  const i0b = besselI0(beta);
  let oddSum = 0;
  for (let m = 1; m <= c; m += 2) {
    const r = m / c;
    const v = (Math.sin((Math.PI * m) / 2) / (Math.PI * m)) * (besselI0(beta * Math.sqrt(Math.max(0, 1 - r * r))) / i0b);
    h[c + m] = v;
    h[c - m] = v;
    oddSum += 2 * v;
  }
  const scale = 0.5 / oddSum;
  for (let m = 1; m <= c; m += 2) {
    h[c + m] = h[c + m]! * scale;
    h[c - m] = h[c - m]! * scale;
  }
  h[c] = 0.5;
  return h;
}

/** Frequencies 0..edge (fraction of the sample rate) at which a design is checked, with their cosines. */
class PassbandGrid {
  readonly cosW: Float64Array;
  readonly twoCos2W: Float64Array;

  constructor(edge: number, points: number) {
    this.cosW = new Float64Array(points + 1);
    this.twoCos2W = new Float64Array(points + 1);
    for (let i = 0; i <= points; i++) {
      const w = (2 * Math.PI * edge * i) / points;
      this.cosW[i] = Math.cos(w);
      this.twoCos2W[i] = 2 * Math.cos(2 * w);
    }
  }

  /**
   * Largest |A(f) - 1| over the grid, where A(f) = 1/2 + 2 sum_{m odd} h[c + m] cos(2 pi f m) is
   * the zero-phase amplitude; the cosines of odd multiples come from the recurrence
   * cos((m+2)w) = 2 cos(2w) cos(mw) - cos((m-2)w), starting from cos(-w) = cos(w).
   */
  deviation(h: Float64Array): number {
    const c = (h.length - 1) / 2;
    let worst = 0;
    for (let i = 0; i < this.cosW.length; i++) {
      const t = this.twoCos2W[i]!;
      let prev = this.cosW[i]!;
      let cur = prev;
      let a = 0.5;
      for (let m = 1; m <= c; m += 2) {
        a += 2 * h[c + m]! * cur;
        const next = t * cur - prev;
        prev = cur;
        cur = next;
      }
      const d = Math.abs(a - 1);
      if (d > worst) worst = d;
    }
    return worst;
  }
}

/** Kaiser's window shape for a stopband attenuation of `a` dB (Kaiser's empirical formula). */
export function kaiserBetaFor(a: number): number {
  if (a > 50) return 0.1102 * (a - 8.7);
  if (a >= 21) return 0.5842 * (a - 21) ** 0.4 + 0.07886 * (a - 21);
  return 0;
}

/**
 * Best beta for a given K, by golden-section search over Kaiser's beta for the attenuation -4..+6.
 * The worst deviation is the larger of the window's sidelobe ripple, which falls as beta grows,
 * and the transition's intrusion into the passband, which grows with beta: one minimum between.
 */
function bestBeta(halfLength: number, grid: PassbandGrid, attenuationDb: number): { beta: number; deviation: number } {
  const dev = (b: number) => grid.deviation(kaiserHalfBandTaps(halfLength, b));
  const b0 = kaiserBetaFor(attenuationDb);
  let lo = Math.max(0, b0 - 4);
  let hi = b0 + 6;
  const g = (Math.sqrt(5) - 1) / 2;
  let x1 = hi - g * (hi - lo);
  let x2 = lo + g * (hi - lo);
  let f1 = dev(x1);
  let f2 = dev(x2);
  // 0.618^20 x 10 < 1e-3
  for (let it = 0; it < 20; it++) {
    if (f1 < f2) {
      hi = x2;
      x2 = x1;
      f2 = f1;
      x1 = hi - g * (hi - lo);
      f1 = dev(x1);
    } else {
      lo = x1;
      x1 = x2;
      f1 = f2;
      x2 = lo + g * (hi - lo);
      f2 = dev(x2);
    }
  }
  return f1 < f2 ? { beta: x1, deviation: f1 } : { beta: x2, deviation: f2 };
}

/**
 * The shortest Kaiser half-band for this input rate, passband edge and attenuation. The search for
 * K starts at Kaiser's length estimate (A - 8) / (2.285 dw) + 1 taps, dw the transition width in
 * rad/sample, then steps down while a shorter filter still meets the spec, or up until one does.
 */
export function designHalfBand(inputRateHz: number, passbandEdgeHz: number, attenuationDb = DEFAULT_ATTENUATION_DB): HalfBandStageDesign {
  const stopbandEdgeHz = inputRateHz / 2 - passbandEdgeHz;
  if (!(passbandEdgeHz > 0) || !(stopbandEdgeHz > passbandEdgeHz)) {
    throw new Error(`half-band stage at ${inputRateHz} Hz cannot pass up to ${passbandEdgeHz} Hz: the passband edge must be below a quarter of the input rate`);
  }
  const delta = 10 ** (-attenuationDb / 20);
  const edge = passbandEdgeHz / inputRateHz;
  const search = new PassbandGrid(edge, SEARCH_GRID);
  let check: PassbandGrid | undefined;
  const tried = new Map<number, HalfBandStageDesign | null>();
  const attempt = (k: number): HalfBandStageDesign | null => {
    let found = tried.get(k);
    if (found !== undefined) return found;
    found = null;
    const { beta, deviation } = bestBeta(k, search, attenuationDb);
    // The search grid may step over an extremum: the dense check decides.
    if (deviation <= delta) {
      const taps = kaiserHalfBandTaps(k, beta);
      check ??= new PassbandGrid(edge, CHECK_GRID);
      const ripple = check.deviation(taps);
      if (ripple <= delta) found = { inputRateHz, passbandEdgeHz, stopbandEdgeHz, taps, kaiserBeta: beta, ripple, attenuationDb: -20 * Math.log10(ripple) };
    }
    tried.set(k, found);
    return found;
  };
  const dw = (2 * Math.PI * (stopbandEdgeHz - passbandEdgeHz)) / inputRateHz;
  const estimateTaps = Math.max(0, attenuationDb - 8) / (2.285 * dw) + 1;
  let k = Math.min(MAX_HALF_LENGTH, Math.max(2, Math.round((estimateTaps + 1) / 4)));
  let design = attempt(k);
  if (design) {
    for (let shorter = k > 2 ? attempt(k - 1) : null; shorter; shorter = --k > 2 ? attempt(k - 1) : null) design = shorter;
    return design;
  }
  while (++k <= MAX_HALF_LENGTH) if ((design = attempt(k))) return design;
  throw new Error(`no half-band filter of up to ${4 * MAX_HALF_LENGTH - 1} taps reaches ${attenuationDb} dB at ${inputRateHz} Hz with a ${passbandEdgeHz} Hz passband`);
}

/**
 * The stages for one input rate and band, designed once and shared by every channel's Decimator
 * (the taps are read-only).
 */
export class DecimatorPlan {
  readonly stages: readonly HalfBandStageDesign[];
  /** Input rate / output rate (a power of two; 1 when no stage is needed). */
  readonly factor: number;
  readonly outputRateHz: number;
  /**
   * Input samples a fresh decimator takes in before its first output (the cascade's window span
   * minus one): the sum over stages i = 0, 1, ... of 2^i (taps_i - 1).
   */
  readonly startupSamples: number;

  /**
   * @param inputRateHz sample rate of the signal
   * @param bandHighHz highest frequency that must come through unaltered
   * @param minOutputRateHz lowest output rate allowed (at least 2 x bandHighHz plus a transition)
   * @param attenuationDb stopband attenuation of every stage
   */
  constructor(
    readonly inputRateHz: number,
    readonly bandHighHz: number,
    minOutputRateHz: number,
    attenuationDb = DEFAULT_ATTENUATION_DB,
  ) {
    if (!(minOutputRateHz > 2 * bandHighHz)) throw new Error(`decimator output rate ${minOutputRateHz} Hz leaves no transition band above ${bandHighHz} Hz`);
    const stages: HalfBandStageDesign[] = [];
    let rate = inputRateHz;
    while (rate / 2 >= minOutputRateHz) {
      stages.push(designHalfBand(rate, bandHighHz, attenuationDb));
      rate /= 2;
    }
    this.stages = stages;
    this.factor = 2 ** stages.length;
    this.outputRateHz = rate;
    let delay = 0;
    stages.forEach((s, i) => (delay += 2 ** i * (s.taps.length - 1)));
    this.startupSamples = delay;
  }

  /** Outputs a fresh (or reset) decimator yields from `inputSamples` contiguous samples. */
  outputsFor(inputSamples: number): number {
    return inputSamples > this.startupSamples ? Math.floor((inputSamples - 1 - this.startupSamples) / this.factor) + 1 : 0;
  }
}

/** Where decimated samples go (the spectrum accumulator). */
export interface SampleSink {
  push(x: Float32Array | Float64Array, length: number): void;
}

/** One half-band stage's running state: the inputs not yet consumed, history first. */
class HalfBandState {
  /** Non-zero taps left of the centre, h[2j] for j = 0..K-1 (h[4K-2-2j] is the same). */
  readonly pairTaps: Float64Array;
  readonly length: number;
  readonly buf: Float64Array;
  /** Samples held in buf. */
  have = 0;

  constructor(design: HalfBandStageDesign, inputCapacity: number) {
    const h = design.taps;
    this.length = h.length;
    const k = (h.length + 1) / 4;
    this.pairTaps = new Float64Array(k);
    for (let j = 0; j < k; j++) this.pairTaps[j] = h[2 * j]!;
    this.buf = new Float64Array(h.length - 1 + inputCapacity);
  }

  /**
   * Computes every output whose input window is complete into out[at..], keeps the unused inputs
   * for the next call, and returns the number of outputs. Output m (s = 2m) is
   *   0.5 x[s + centre] + sum_j g_j (x[s + 2j] + x[s + last - 2j]).
   * Four outputs are computed together: for outputs s, s+2, s+4, s+6 the left samples at tap j are
   * x[s + 2j + 2r], r = 0..3, a window that slides by one sample per tap (likewise the right ones,
   * the other way), so each tap loads two new samples instead of eight.
   */
  run(out: Float64Array, at: number): number {
    const buf = this.buf;
    const g = this.pairTaps;
    const k = g.length;
    const last = this.length - 1;
    const centre = last >> 1;
    const end = this.have - this.length;
    let o = at;
    let s = 0;
    for (; s + 6 <= end; s += 8) {
      let a0 = 0.5 * buf[s + centre]!;
      let a1 = 0.5 * buf[s + centre + 2]!;
      let a2 = 0.5 * buf[s + centre + 4]!;
      let a3 = 0.5 * buf[s + centre + 6]!;
      let l0 = buf[s]!;
      let l1 = buf[s + 2]!;
      let l2 = buf[s + 4]!;
      let l3 = buf[s + 6]!;
      let r0 = buf[s + last]!;
      let r1 = buf[s + last + 2]!;
      let r2 = buf[s + last + 4]!;
      let r3 = buf[s + last + 6]!;
      for (let j = 0, p = s + 8, q = s + last - 2; ; p += 2, q -= 2) {
        const gj = g[j]!;
        a0 += gj * (l0 + r0);
        a1 += gj * (l1 + r1);
        a2 += gj * (l2 + r2);
        a3 += gj * (l3 + r3);
        if (++j === k) break;
        l0 = l1;
        l1 = l2;
        l2 = l3;
        l3 = buf[p]!;
        r3 = r2;
        r2 = r1;
        r1 = r0;
        r0 = buf[q]!;
      }
      out[o] = a0;
      out[o + 1] = a1;
      out[o + 2] = a2;
      out[o + 3] = a3;
      o += 4;
    }
    for (; s <= end; s += 2) {
      let acc = 0.5 * buf[s + centre]!;
      for (let j = 0, p = s, q = s + last; j < k; j++, p += 2, q -= 2) acc += g[j]! * (buf[p]! + buf[q]!);
      out[o++] = acc;
    }
    buf.copyWithin(0, s, this.have);
    this.have -= s;
    return o - at;
  }
}

/** One channel's decimator: state carried across blocks; allocation only at construction. */
export class Decimator {
  private readonly states: HalfBandState[];
  private readonly out: Float64Array;

  constructor(readonly plan: DecimatorPlan) {
    let cap = CHUNK;
    this.states = plan.stages.map((d) => {
      const s = new HalfBandState(d, cap);
      cap = (cap >> 1) + 1;
      return s;
    });
    this.out = new Float64Array(cap);
  }

  /** Filters and decimates x[0..length) and hands the output to `sink`, one chunk at a time. */
  process(x: Float32Array | Float64Array, length: number, sink: SampleSink): void {
    const states = this.states;
    const n = states.length;
    if (n === 0) {
      sink.push(x, length);
      return;
    }
    const first = states[0]!;
    let i = 0;
    while (i < length) {
      const run = Math.min(length - i, CHUNK);
      const buf = first.buf;
      let w = first.have;
      for (let j = 0; j < run; j++) buf[w++] = x[i + j]!;
      first.have = w;
      i += run;
      for (let s = 0; s + 1 < n; s++) {
        const next = states[s + 1]!;
        next.have += states[s]!.run(next.buf, next.have);
      }
      const produced = states[n - 1]!.run(this.out, 0);
      if (produced > 0) sink.push(this.out, produced);
    }
  }

  /** Forgets the filter history (after a gap): the next outputs come from new samples only. */
  reset(): void {
    for (const s of this.states) s.have = 0;
  }
}
