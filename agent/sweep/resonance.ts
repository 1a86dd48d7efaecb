/**
 * Resonances on a 1x-against-speed curve (pure).
 *
 * A resonance is an amplitude peak together with the phase shift through it (common practice: a
 * lightly damped mode swings the 1x phase by about 90 degrees across its half-power band and 180
 * through the whole of it). The peak must fall to 0.707 of its height on both sides within the
 * measured speed range: a curve that only rises with speed (a stiff support, 1x growing with speed
 * squared or cubed) has no such fall at its top end and reports nothing there.
 *
 * Amplification factor by the half-power method on the 1x amplitude curve as measured:
 * AF = N_peak / (N2 - N1), N1 and N2 where the amplitude is 0.707 of the peak (API 684 practice,
 * from memory). Separation margin to the rated speed, and the margin API 684 asks for that AF
 * (from memory):
 *   AF < 2.5: critically damped, no margin required;
 *   resonance below the operating speed: SM = min(16, 17 * (1 - 1 / (AF - 1.5))) %;
 *   resonance above the operating speed: SM = min(26, 10 + 17 * (1 - 1 / (AF - 1.5))) %.
 * Separation margin here = 100 * |N_rated - N_peak| / N_rated (margin relative to the operating
 * speed).
 */

export interface Resonance {
  readonly rpm: number;
  readonly amp_pk_mm_s: number;
  /** Phase lag at the peak, degrees 0-360. */
  readonly phase_deg: number;
  /** Half-power speeds, r/min. */
  readonly half_power_rpm: readonly [number, number];
  /** Phase change between the half-power points, degrees (signed, wrapped to -180..180). */
  readonly phase_shift_deg: number;
  readonly amplification_factor: number;
  /** Null when no rated speed is known. */
  readonly separation_margin_pct: number | null;
  readonly required_margin_pct: number | null;
  /** False when the resonance sits closer to rated speed than the required margin. */
  readonly margin_ok: boolean | null;
}

export interface ResonanceOptions {
  /** Smallest phase change across the half-power band to call a peak a resonance, degrees. */
  readonly minPhaseShiftDeg: number;
  readonly ratedRpm?: number;
}

const HALF_POWER = Math.SQRT1_2;

/** Wraps a phase difference to -180..180 degrees. */
export function wrap180(d: number): number {
  const r = ((((d + 180) % 360) + 360) % 360) - 180;
  return r === -180 ? 180 : r;
}

/** Median of three neighbours: removes single-point spikes without moving a broad peak. */
function median3(x: ArrayLike<number>): Float64Array {
  const n = x.length;
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    if (i === 0 || i === n - 1) {
      y[i] = x[i]!;
      continue;
    }
    const a = x[i - 1]!;
    const b = x[i]!;
    const c = x[i + 1]!;
    y[i] = Math.max(Math.min(a, b), Math.min(Math.max(a, b), c));
  }
  return y;
}

/** Speed where the curve crosses `level` between points i and j (linear interpolation). */
function cross(
  rpm: ArrayLike<number>,
  a: ArrayLike<number>,
  i: number,
  j: number,
  level: number,
): number {
  const ai = a[i]!;
  const aj = a[j]!;
  const f = aj === ai ? 0 : (level - ai) / (aj - ai);
  return rpm[i]! + f * (rpm[j]! - rpm[i]!);
}

/** The separation margin API 684 asks for at a given AF (from memory); 0 when critically damped. */
export function requiredMarginPct(af: number, above: boolean): number {
  if (af < 2.5) return 0;
  const base = 17 * (1 - 1 / (af - 1.5));
  return above ? Math.min(26, 10 + base) : Math.min(16, base);
}

/**
 * Resonances of one channel. `rpm` must be sorted ascending (reverse a coast-down first); `amp` is
 * zero-to-peak velocity, `phaseDeg` the lag at each point.
 */
export function findResonances(
  rpm: ArrayLike<number>,
  amp: ArrayLike<number>,
  phaseDeg: ArrayLike<number>,
  opts: ResonanceOptions,
): Resonance[] {
  const n = rpm.length;
  const out: Resonance[] = [];
  if (n < 5) return out;
  const a = median3(amp);
  let p = 1;
  while (p < n - 1) {
    if (!(a[p]! >= a[p - 1]! && a[p]! > a[p + 1]!)) {
      p++;
      continue;
    }
    const half = a[p]! * HALF_POWER;
    let j = p;
    while (j > 0 && a[j]! > half) j--;
    let k = p;
    while (k < n - 1 && a[k]! > half) k++;
    if (a[j]! > half || a[k]! > half) {
      // No fall to the half-power level on one side inside the measured range: not a resonance
      // that can be judged (the curve's end, or a broad rise).
      p++;
      continue;
    }
    let top = p;
    for (let i = j; i <= k; i++) if (a[i]! > a[top]!) top = i;
    if (top !== p) {
      p = top;
      continue;
    }
    const n1 = cross(rpm, a, j, j + 1, half);
    const n2 = cross(rpm, a, k - 1, k, half);
    const shift = phaseChange(phaseDeg, j, k);
    if (Math.abs(shift) >= opts.minPhaseShiftDeg && n2 > n1) {
      const peakRpm = rpm[p]!;
      const af = peakRpm / (n2 - n1);
      const rated = opts.ratedRpm;
      const sm = rated ? (100 * Math.abs(rated - peakRpm)) / rated : null;
      const req = rated ? requiredMarginPct(af, peakRpm > rated) : null;
      out.push({
        rpm: peakRpm,
        amp_pk_mm_s: amp[p]!,
        phase_deg: phaseDeg[p]!,
        half_power_rpm: [n1, n2],
        phase_shift_deg: shift,
        amplification_factor: af,
        separation_margin_pct: sm,
        required_margin_pct: req,
        margin_ok: sm === null || req === null ? null : sm >= req,
      });
    }
    p = k + 1;
  }
  return out;
}

/** Phase change from point i to point j, following the curve point by point (unwrapped). */
function phaseChange(phaseDeg: ArrayLike<number>, i: number, j: number): number {
  let total = 0;
  for (let m = i; m < j; m++) total += wrap180(phaseDeg[m + 1]! - phaseDeg[m]!);
  return total;
}
