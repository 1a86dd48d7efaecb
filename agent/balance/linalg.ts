/**
 * Small dense complex linear algebra for influence-coefficient balancing: least-squares solves and
 * singular values of matrices a few rows by a few columns. Pure functions over Float64Array.
 *
 * A complex m x n system A x = b is solved through its real embedding
 *   [Re A  -Im A] [Re x]   [Re b]
 *   [Im A   Re A] [Im x] = [Im b]
 * (2m x 2n). The embedding has the same singular values as A, each twice, so the condition number
 * and the least-squares solution carry over exactly.
 */
import { type Complex } from './complex.js';

/** Row-major complex matrix. */
export interface CMatrix {
  readonly rows: number;
  readonly cols: number;
  readonly re: Float64Array;
  readonly im: Float64Array;
}

export function cmatrix(rows: number, cols: number): CMatrix {
  return { rows, cols, re: new Float64Array(rows * cols), im: new Float64Array(rows * cols) };
}

export function cmatrixFrom(rows: readonly (readonly Complex[])[]): CMatrix {
  const m = cmatrix(rows.length, rows[0]?.length ?? 0);
  rows.forEach((row, i) => {
    if (row.length !== m.cols) throw new Error('cmatrixFrom: ragged rows');
    row.forEach((z, j) => setEl(m, i, j, z));
  });
  return m;
}

export function getEl(m: CMatrix, i: number, j: number): Complex {
  const k = i * m.cols + j;
  return { re: m.re[k]!, im: m.im[k]! };
}

export function setEl(m: CMatrix, i: number, j: number, z: Complex): void {
  const k = i * m.cols + j;
  m.re[k] = z.re;
  m.im[k] = z.im;
}

/** A B */
export function cmul(a: CMatrix, b: CMatrix): CMatrix {
  if (a.cols !== b.rows) throw new Error('cmul: shape mismatch');
  const out = cmatrix(a.rows, b.cols);
  for (let i = 0; i < a.rows; i++) {
    for (let j = 0; j < b.cols; j++) {
      let re = 0;
      let im = 0;
      for (let k = 0; k < a.cols; k++) {
        const ar = a.re[i * a.cols + k]!;
        const ai = a.im[i * a.cols + k]!;
        const br = b.re[k * b.cols + j]!;
        const bi = b.im[k * b.cols + j]!;
        re += ar * br - ai * bi;
        im += ar * bi + ai * br;
      }
      out.re[i * out.cols + j] = re;
      out.im[i * out.cols + j] = im;
    }
  }
  return out;
}

/** Real embedding of A, row-major (2m x 2n). */
function embed(a: CMatrix): Float64Array {
  const m = a.rows;
  const n = a.cols;
  const w = 2 * n;
  const out = new Float64Array(2 * m * w);
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < n; j++) {
      const re = a.re[i * n + j]!;
      const im = a.im[i * n + j]!;
      out[i * w + j] = re;
      out[i * w + n + j] = -im;
      out[(m + i) * w + j] = im;
      out[(m + i) * w + n + j] = re;
    }
  }
  return out;
}

/**
 * Singular values of A (n = cols of them, largest first), from the eigenvalues of the real
 * embedding's Gram matrix by cyclic Jacobi rotations. Fine for the few columns balancing has.
 */
export function singularValues(a: CMatrix): Float64Array {
  const n2 = 2 * a.cols;
  const m2 = 2 * a.rows;
  const e = embed(a);
  const g = new Float64Array(n2 * n2);
  for (let i = 0; i < n2; i++) {
    for (let j = i; j < n2; j++) {
      let s = 0;
      for (let k = 0; k < m2; k++) s += e[k * n2 + i]! * e[k * n2 + j]!;
      g[i * n2 + j] = s;
      g[j * n2 + i] = s;
    }
  }
  for (let sweep = 0; sweep < 60; sweep++) {
    let off = 0;
    for (let p = 0; p < n2; p++) for (let q = p + 1; q < n2; q++) off += g[p * n2 + q]! ** 2;
    if (off < 1e-30 * (1 + Math.abs(g[0]!) ** 2)) break;
    for (let p = 0; p < n2; p++) {
      for (let q = p + 1; q < n2; q++) {
        const apq = g[p * n2 + q]!;
        if (apq === 0) continue;
        const app = g[p * n2 + p]!;
        const aqq = g[q * n2 + q]!;
        const theta = (aqq - app) / (2 * apq);
        const t = Math.sign(theta || 1) / (Math.abs(theta) + Math.sqrt(theta * theta + 1));
        const c = 1 / Math.sqrt(t * t + 1);
        const s = t * c;
        for (let k = 0; k < n2; k++) {
          const gkp = g[k * n2 + p]!;
          const gkq = g[k * n2 + q]!;
          g[k * n2 + p] = c * gkp - s * gkq;
          g[k * n2 + q] = s * gkp + c * gkq;
        }
        for (let k = 0; k < n2; k++) {
          const gpk = g[p * n2 + k]!;
          const gqk = g[q * n2 + k]!;
          g[p * n2 + k] = c * gpk - s * gqk;
          g[q * n2 + k] = s * gpk + c * gqk;
        }
      }
    }
  }
  const eig = Array.from({ length: n2 }, (_, i) => Math.max(0, g[i * n2 + i]!)).sort(
    (x, y) => y - x,
  );
  // Each singular value of A appears twice in the embedding: keep every other one.
  const out = new Float64Array(a.cols);
  for (let i = 0; i < a.cols; i++) out[i] = Math.sqrt((eig[2 * i]! + eig[2 * i + 1]!) / 2);
  return out;
}

/** sigma_max / sigma_min of A; Infinity when A is rank-deficient or has more columns than rows. */
export function conditionNumber(a: CMatrix): number {
  if (a.cols === 0) return 1;
  if (a.rows < a.cols) return Infinity;
  const s = singularValues(a);
  const hi = s[0]!;
  const lo = s[s.length - 1]!;
  if (hi === 0) return Infinity;
  if (lo <= hi * 1e-15) return Infinity;
  return hi / lo;
}

/**
 * Condition number after scaling every column to unit length. Scaling a column only changes the
 * unit of one unknown (grams in one plane), so this is the measure of how well the columns are told
 * apart; a plane that is merely less sensitive than another does not count as ill-conditioning.
 * Infinity when a column is zero.
 */
export function columnScaledConditionNumber(a: CMatrix): number {
  const b = cmatrix(a.rows, a.cols);
  for (let j = 0; j < a.cols; j++) {
    let n = 0;
    for (let i = 0; i < a.rows; i++) n += a.re[i * a.cols + j]! ** 2 + a.im[i * a.cols + j]! ** 2;
    n = Math.sqrt(n);
    if (n === 0) return Infinity;
    for (let i = 0; i < a.rows; i++) {
      b.re[i * a.cols + j] = a.re[i * a.cols + j]! / n;
      b.im[i * a.cols + j] = a.im[i * a.cols + j]! / n;
    }
  }
  return conditionNumber(b);
}

/**
 * Least-squares solution X minimising ||A X - B|| column by column (exact when A is square and
 * regular), by Householder QR of the real embedding. A must have full column rank: check
 * `conditionNumber` first. Returns X (cols(A) x cols(B)).
 */
export function leastSquares(a: CMatrix, b: CMatrix): CMatrix {
  if (a.rows !== b.rows) throw new Error('leastSquares: row mismatch');
  if (a.rows < a.cols) throw new Error('leastSquares: fewer rows than columns');
  const m2 = 2 * a.rows;
  const n2 = 2 * a.cols;
  const k = b.cols;
  const r = embed(a);
  // Right-hand sides in the embedding: column c of B becomes [Re; Im].
  const y = new Float64Array(m2 * k);
  for (let i = 0; i < b.rows; i++) {
    for (let c = 0; c < k; c++) {
      y[i * k + c] = b.re[i * k + c]!;
      y[(b.rows + i) * k + c] = b.im[i * k + c]!;
    }
  }
  const v = new Float64Array(m2);
  for (let j = 0; j < n2; j++) {
    let norm = 0;
    for (let i = j; i < m2; i++) norm += r[i * n2 + j]! ** 2;
    norm = Math.sqrt(norm);
    if (norm === 0) throw new Error('leastSquares: rank-deficient matrix');
    const alpha = r[j * n2 + j]! > 0 ? -norm : norm;
    for (let i = 0; i < m2; i++) v[i] = i < j ? 0 : r[i * n2 + j]!;
    v[j] = v[j]! - alpha;
    let vnorm2 = 0;
    for (let i = j; i < m2; i++) vnorm2 += v[i]! ** 2;
    if (vnorm2 === 0) continue;
    for (let col = j; col < n2; col++) {
      let dot = 0;
      for (let i = j; i < m2; i++) dot += v[i]! * r[i * n2 + col]!;
      const f = (2 * dot) / vnorm2;
      for (let i = j; i < m2; i++) r[i * n2 + col] = r[i * n2 + col]! - f * v[i]!;
    }
    for (let c = 0; c < k; c++) {
      let dot = 0;
      for (let i = j; i < m2; i++) dot += v[i]! * y[i * k + c]!;
      const f = (2 * dot) / vnorm2;
      for (let i = j; i < m2; i++) y[i * k + c] = y[i * k + c]! - f * v[i]!;
    }
  }
  // Back substitution on the upper triangle.
  const xr = new Float64Array(n2 * k);
  for (let c = 0; c < k; c++) {
    for (let i = n2 - 1; i >= 0; i--) {
      let s = y[i * k + c]!;
      for (let j = i + 1; j < n2; j++) s -= r[i * n2 + j]! * xr[j * k + c]!;
      const d = r[i * n2 + i]!;
      if (d === 0) throw new Error('leastSquares: rank-deficient matrix');
      xr[i * k + c] = s / d;
    }
  }
  const x = cmatrix(a.cols, k);
  for (let i = 0; i < a.cols; i++) {
    for (let c = 0; c < k; c++) {
      x.re[i * k + c] = xr[i * k + c]!;
      x.im[i * k + c] = xr[(a.cols + i) * k + c]!;
    }
  }
  return x;
}
