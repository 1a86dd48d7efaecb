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
 * - Zero-phase amplitude A(w) = 1/2 + 2 sum_{n=0}^{K-1} h_n cos((2n+1) w), w = 2 pi f / r, h_n the
 *   tap at distance 2n+1 from the centre. A(w) + A(pi - w) = 1, so the stopband gain at r/2 - f is
 *   the passband error at f: one spec, |A(f) - 1| <= delta on [0, B], gives both the passband
 *   ripple and the stopband attenuation (>= A dB). One number, `ripple`, reports both.
 * - Taps: equiripple (minimax). With theta = 2w, A - 1 = cos(theta/2) P(cos theta) - 1/2 where P is
 *   a polynomial of degree K-1, so the design is the weighted Chebyshev approximation of
 *   1 / (2 cos(theta/2)) with weight cos(theta/2) on [0, 4 pi B / r], solved by the Remez exchange
 *   (Parks & McClellan 1972; the reduction of a half-band to this one-band problem is Vaidyanathan
 *   & Nguyen 1987). The error then reaches +/-delta with alternating signs at K+1 frequencies,
 *   which by Chebyshev's alternation theorem makes delta the smallest any 4K-1 tap half-band can
 *   have. For 120 dB at 25.6 kHz the three stages need 4, 5 and 10 tap pairs (15, 19 and 39 taps),
 *   against 6, 7 and 12 pairs for the best Kaiser-window design.
 * - K is the smallest that meets the spec, checked on a dense grid of the actual taps.
 *
 * Stages are added while the output rate stays at or above `minOutputRateHz` (the analyzer uses
 * 2.56 x the band edge), so 25.6 kHz with a 1 kHz band gives three stages and 3.2 kHz; a source
 * that is already slow gets no stage at all. With the default 120 dB, the passband gain of the
 * whole cascade is within 3e-6 of 1 (three stages of at most 1e-6 each): well below anything the
 * overall can show, so the spectrum needs no passband correction.
 *
 * Processing is streaming and block-size independent: each stage keeps its last 4K-2 inputs (and an
 * odd leftover) across calls and only computes the outputs that are kept (polyphase: one output per
 * two inputs, zero taps skipped). An output is only produced once the stage has seen a whole
 * window of real input, so nothing is made from the zeros before a start or a gap.
 */

/** Default stopband attenuation, dB: about the dynamic range of a 24-bit acquisition front end. */
export const DEFAULT_ATTENUATION_DB = 120;

/**
 * Input samples per pass through the stages: one channel's stage buffers stay near 16 KB, in L1
 * cache.
 */
const CHUNK = 1024;

/** Longest half-band considered, K (4K-1 taps); a spec that needs more is refused. */
const MAX_HALF_LENGTH = 64;

/** Grid points over the passband for the final check of a design. */
const CHECK_GRID = 2048;

export interface HalfBandStageDesign {
  /** Sample rate into the stage, Hz; the stage outputs half of it. */
  readonly inputRateHz: number;
  /** Passband edge, Hz. */
  readonly passbandEdgeHz: number;
  /**
   * Stopband edge (= inputRateHz / 2 - passbandEdgeHz): where aliases into the passband begin, Hz.
   */
  readonly stopbandEdgeHz: number;
  /** Impulse response, 4K-1 taps, symmetric, centre tap 1/2, taps at even distance from it 0. */
  readonly taps: Float64Array;
  /** Largest |A(f) - 1| over the passband (= largest |A(f)| over the stopband). */
  readonly ripple: number;
  /** -20 log10(ripple): the stopband attenuation reached, dB. */
  readonly attenuationDb: number;
}

/**
 * Frequencies 0..edge (fraction of the sample rate) at which a design is checked, with their
 * cosines.
 */
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
      if (!(d <= worst)) worst = Number.isNaN(d) ? Infinity : d;
    }
    return worst;
  }
}

/**
 * Equiripple half-band of 4K-1 taps with passband [0, edge] (edge as a fraction of the sample rate,
 * below 1/4), by the Remez exchange on the one-band problem described at the top of this file.
 * Returns the taps and the levelled error delta (the largest passband error, reached at K+1
 * frequencies), or null if the exchange cannot find K+1 alternating extrema (a length so far beyond
 * the need that the error is below double precision).
 */
export function equirippleHalfBandTaps(
  halfLength: number,
  edge: number,
): { taps: Float64Array; delta: number } | null {
  const K = halfLength;
  const thetaP = 4 * Math.PI * edge; // theta = 2 omega, omega_p = 2 pi edge
  const xp = Math.cos(thetaP);
  // Grid over x = cos(theta) in [xp, 1] at Chebyshev points of t = (2x - xp - 1) / (1 - xp), dense
  // at both ends where the extrema of the error crowd; W = cos(theta / 2), D = 1 / (2 W).
  const M = 32 * (K + 1) + 64;
  const gt = new Float64Array(M);
  const gw = new Float64Array(M);
  const gd = new Float64Array(M);
  const ge = new Float64Array(M);
  for (let i = 0; i < M; i++) {
    const t = Math.cos((Math.PI * i) / (M - 1));
    gt[i] = t;
    gw[i] = Math.sqrt((1 + xp + ((t + 1) * (1 - xp)) / 2) / 2);
    gd[i] = 0.5 / gw[i]!;
  }
  // P interpolates C_k at the first K reference points (barycentric weights bw).
  const nodes = new Float64Array(K);
  const values = new Float64Array(K);
  const bw = new Float64Array(K);
  const interpolate = (t: number): number => {
    let num = 0;
    let den = 0;
    for (let k = 0; k < K; k++) {
      const d = t - nodes[k]!;
      if (d === 0) return values[k]!;
      const q = bw[k]! / d;
      num += q * values[k]!;
      den += q;
    }
    return num / den;
  };
  // Initial reference: the Chebyshev extrema t = cos(pi k / K).
  let ref = Array.from({ length: K + 1 }, (_, k) => Math.round((k * (M - 1)) / K));
  let found = false;
  let delta = NaN;
  for (let iter = 0; iter < 100; iter++) {
    // Levelled error delta on the reference, then P through D - (-1)^k delta / W.
    let num = 0;
    let den = 0;
    for (let k = 0; k <= K; k++) {
      let g = 1;
      for (let i = 0; i <= K; i++) if (i !== k) g /= gt[ref[k]!]! - gt[ref[i]!]!;
      num += g * gd[ref[k]!]!;
      den += (k % 2 ? -g : g) / gw[ref[k]!]!;
    }
    delta = num / den;
    for (let k = 0; k < K; k++) {
      nodes[k] = gt[ref[k]!]!;
      values[k] = gd[ref[k]!]! - (k % 2 ? -delta : delta) / gw[ref[k]!]!;
    }
    for (let k = 0; k < K; k++) {
      let g = 1;
      for (let i = 0; i < K; i++) if (i !== k) g /= nodes[k]! - nodes[i]!;
      bw[k] = g;
    }
    let maxErr = 0;
    for (let i = 0; i < M; i++) {
      ge[i] = gw[i]! * (interpolate(gt[i]!) - gd[i]!);
      maxErr = Math.max(maxErr, Math.abs(ge[i]!));
    }
    // New reference: local extrema at least |delta| (less a rounding allowance), alternating in
    // sign (of neighbours with the same sign the larger is kept), trimmed to K+1 from the ends.
    const level = Math.abs(delta) * (1 - 1e-3) - 1e-12;
    const alt: number[] = [];
    for (let i = 0; i < M; i++) {
      const e = ge[i]!;
      const s = e >= 0 ? 1 : -1;
      if (!(
        (i === 0 || e * s > ge[i - 1]! * s) &&
        (i === M - 1 || e * s >= ge[i + 1]! * s) &&
        Math.abs(e) >= level
      ))
        continue;
      const last = alt[alt.length - 1];
      if (last !== undefined && ge[last]! >= 0 === e >= 0) {
        if (Math.abs(e) > Math.abs(ge[last]!)) alt[alt.length - 1] = i;
      } else alt.push(i);
    }
    while (alt.length > K + 1) {
      if (Math.abs(ge[alt[0]!]!) < Math.abs(ge[alt[alt.length - 1]!]!)) alt.shift();
      else alt.pop();
    }
    if (alt.length < K + 1) break;
    found = true;
    const same = alt.every((v, j) => v === ref[j]);
    ref = alt;
    if (same || maxErr - Math.abs(delta) <= 1e-9 * Math.abs(delta)) break;
  }
  if (!found) return null;
  // Taps from F(theta) = W P = 2 sum_n h_n cos((n + 1/2) theta) sampled at theta_m = pi
  // (m + 1/2) / K (DCT-IV orthogonality): h_n = (1/K) sum_m F(theta_m) cos((n + 1/2) theta_m). P is
  // evaluated there in the first (modified Lagrange) barycentric form, which stays accurate outside
  // the grid.
  const h = new Float64Array(4 * K - 1);
  const c = 2 * K - 1;
  h[c] = 0.5;
  for (let m = 0; m < K; m++) {
    const th = (Math.PI * (m + 0.5)) / K;
    const t = (2 * Math.cos(th) - xp - 1) / (1 - xp);
    let l = 1;
    let s = 0;
    let p = NaN;
    for (let k = 0; k < K; k++) {
      const d = t - nodes[k]!;
      if (d === 0) {
        p = values[k]!;
        break;
      }
      l *= d;
      s += (bw[k]! * values[k]!) / d;
    }
    if (Number.isNaN(p)) p = l * s;
    const f = Math.cos(th / 2) * p;
    for (let n = 0; n < K; n++) {
      const v = (f * Math.cos((n + 0.5) * th)) / K;
      h[c + 2 * n + 1] = h[c + 2 * n + 1]! + v;
      h[c - 2 * n - 1] = h[c - 2 * n - 1]! + v;
    }
  }
  return { taps: h, delta: Math.abs(delta) };
}

/**
 * The shortest equiripple half-band for this input rate, passband edge and attenuation, checked
 * on a dense grid of the actual taps. The search starts at half of Kaiser's length estimate
 * (A - 8) / (2.285 dw) + 1 taps (dw the transition width, rad/sample; an equiripple design needs
 * fewer), steps down while a shorter filter still meets the spec and up until one does. A length
 * so far beyond the need that its error is below double precision makes the exchange fail; the
 * search then starts again from the shortest.
 */
export function designHalfBand(
  inputRateHz: number,
  passbandEdgeHz: number,
  attenuationDb = DEFAULT_ATTENUATION_DB,
): HalfBandStageDesign {
  const stopbandEdgeHz = inputRateHz / 2 - passbandEdgeHz;
  if (!(passbandEdgeHz > 0) || !(stopbandEdgeHz > passbandEdgeHz)) {
    throw new Error(
      `half-band stage at ${inputRateHz} Hz cannot pass up to ${passbandEdgeHz} Hz: ` +
        `the passband edge must be below a quarter of the input rate`,
    );
  }
  const delta = 10 ** (-attenuationDb / 20);
  const edge = passbandEdgeHz / inputRateHz;
  const check = new PassbandGrid(edge, CHECK_GRID);
  /** The design of K pairs and whether it meets the spec, or null when the exchange failed. */
  const attempt = (k: number): { design: HalfBandStageDesign; ok: boolean } | null => {
    const r = equirippleHalfBandTaps(k, edge);
    if (!r) return null;
    // The error reaches the levelled delta, so a delta above the spec needs no further check.
    const ripple = r.delta > delta ? r.delta : check.deviation(r.taps);
    return {
      design: {
        inputRateHz,
        passbandEdgeHz,
        stopbandEdgeHz,
        taps: r.taps,
        ripple,
        attenuationDb: -20 * Math.log10(ripple),
      },
      ok: ripple <= delta,
    };
  };
  const dw = (2 * Math.PI * (stopbandEdgeHz - passbandEdgeHz)) / inputRateHz;
  const estimateTaps = Math.max(0, attenuationDb - 8) / (2.285 * dw) + 1;
  let k = Math.min(MAX_HALF_LENGTH, Math.max(1, Math.round((estimateTaps + 1) / 8)));
  let a = attempt(k);
  if (a?.ok) {
    let best = a.design;
    while (k > 1 && (a = attempt(k - 1))?.ok) {
      best = a.design;
      k--;
    }
    return best;
  }
  if (!a) k = 0;
  while (++k <= MAX_HALF_LENGTH) if ((a = attempt(k))?.ok) return a.design;
  throw new Error(
    `no half-band filter of up to ${4 * MAX_HALF_LENGTH - 1} taps reaches ` +
      `${attenuationDb} dB at ${inputRateHz} Hz with a ${passbandEdgeHz} Hz passband`,
  );
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
    if (!(minOutputRateHz > 2 * bandHighHz))
      throw new Error(
        `decimator output rate ${minOutputRateHz} Hz ` +
          `leaves no transition band above ${bandHighHz} Hz`,
      );
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
    return inputSamples > this.startupSamples
      ? Math.floor((inputSamples - 1 - this.startupSamples) / this.factor) + 1
      : 0;
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
      for (let j = 0, p = s, q = s + last; j < k; j++, p += 2, q -= 2)
        acc += g[j]! * (buf[p]! + buf[q]!);
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
      // A native copy (with the float32 -> float64 conversion) is several times faster than a
      // loop; its view object is one small allocation per chunk, none per sample.
      first.buf.set(x.subarray(i, i + run), first.have);
      first.have += run;
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
