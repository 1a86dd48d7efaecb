/**
 * Seeded pseudo-random numbers for the simulator: the same seed gives the same samples on every
 * machine. sfc32 ("small fast counter", 32-bit state words) for uniforms, and a table of normal
 * deviates indexed at random for cheap white noise (no Math.log per sample).
 */
export class Random {
  private a: number;
  private b: number;
  private c: number;
  private d: number;

  constructor(seed: number) {
    // splitmix32 spreads a small seed over the four state words
    let s = seed >>> 0;
    const next = () => {
      s = (s + 0x9e3779b9) >>> 0;
      let z = s;
      z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
      z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
      return (z ^ (z >>> 16)) >>> 0;
    };
    this.a = next();
    this.b = next();
    this.c = next();
    this.d = next();
    for (let i = 0; i < 12; i++) this.uint32();
  }

  uint32(): number {
    const t = (((this.a + this.b) | 0) + this.d) | 0;
    this.d = (this.d + 1) | 0;
    this.a = this.b ^ (this.b >>> 9);
    this.b = (this.c + (this.c << 3)) | 0;
    this.c = (this.c << 21) | (this.c >>> 11);
    this.c = (this.c + t) | 0;
    return t >>> 0;
  }

  /** Uniform on [0, 1). */
  uniform(): number {
    return this.uint32() / 4294967296;
  }

  /** Standard normal deviate (Box-Muller). For set-up work, not per sample. */
  normal(): number {
    const u = 1 - this.uniform();
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * this.uniform());
  }
}

export const NOISE_TABLE_BITS = 16;

/** 2^16 standard normal deviates, scaled to mean 0 and r.m.s. exactly 1. */
export function normalTable(rng: Random): Float32Array {
  const n = 1 << NOISE_TABLE_BITS;
  const t = new Float64Array(n);
  let sum = 0;
  for (let i = 0; i < n; i++) {
    t[i] = rng.normal();
    sum += t[i];
  }
  const mean = sum / n;
  let sq = 0;
  for (let i = 0; i < n; i++) {
    t[i] -= mean;
    sq += t[i] * t[i];
  }
  const k = 1 / Math.sqrt(sq / n);
  const out = new Float32Array(n);
  for (let i = 0; i < n; i++) out[i] = t[i] * k;
  return out;
}
