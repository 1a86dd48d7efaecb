import { describe, expect, it } from 'vitest';
import { argDeg, complex, deltaDeg, fromPolar, wrapDeg } from '../agent/balance/complex.js';
import {
  cmatrixFrom,
  conditionNumber,
  getEl,
  leastSquares,
  singularValues,
} from '../agent/balance/linalg.js';
import {
  centrifugalForceN,
  combineWeights,
  moveToRadius,
  parseGrade,
  permissibleUnbalanceGmm,
  splitOntoPositions,
  STANDARD_GRAVITY,
  suggestTrialMassG,
} from '../agent/balance/weights.js';

const D2R = Math.PI / 180;

describe('angles', () => {
  it('wraps and differences degrees', () => {
    expect(wrapDeg(-30)).toBe(330);
    expect(wrapDeg(720)).toBe(0);
    expect(wrapDeg(-1e-15)).toBe(0);
    expect(deltaDeg(10, 350)).toBe(20);
    expect(deltaDeg(350, 10)).toBe(-20);
    expect(deltaDeg(180, 0)).toBe(180);
    expect(argDeg(complex(0, -1))).toBe(270);
  });
});

describe('complex linear algebra', () => {
  it('singular values of [[3,0],[4,5]] are 3*sqrt(5) and sqrt(5) (Strang, Introduction to Linear Algebra, SVD example; from memory)', () => {
    const a = cmatrixFrom([
      [complex(3, 0), complex(0, 0)],
      [complex(4, 0), complex(5, 0)],
    ]);
    const s = singularValues(a);
    expect(s[0]).toBeCloseTo(3 * Math.sqrt(5), 12);
    expect(s[1]).toBeCloseTo(Math.sqrt(5), 12);
    expect(conditionNumber(a)).toBeCloseTo(3, 12);
  });

  it('a unitary matrix has condition number 1; a rank-1 matrix is singular', () => {
    const k = 1 / Math.SQRT2;
    expect(
      conditionNumber(
        cmatrixFrom([
          [complex(k, 0), complex(0, k)],
          [complex(0, k), complex(k, 0)],
        ]),
      ),
    ).toBeCloseTo(1, 12);
    const h1 = fromPolar(0.05, 30);
    const h2 = fromPolar(0.02, 80);
    const m = fromPolar(0.8, -90);
    const mul = (a: { re: number; im: number }, b: { re: number; im: number }) =>
      complex(a.re * b.re - a.im * b.im, a.re * b.im + a.im * b.re);
    expect(
      conditionNumber(
        cmatrixFrom([
          [h1, h2],
          [mul(h1, m), mul(h2, m)],
        ]),
      ),
    ).toBeGreaterThan(1e12);
  });

  it("solves a 2x2 complex system as Cramer's rule does", () => {
    const a11 = complex(1, 2);
    const a12 = complex(-0.5, 0.3);
    const a21 = complex(0.2, -1);
    const a22 = complex(2, 0.5);
    const b1 = complex(3, -1);
    const b2 = complex(-2, 4);
    const mul = (x: { re: number; im: number }, y: { re: number; im: number }) => ({
      re: x.re * y.re - x.im * y.im,
      im: x.re * y.im + x.im * y.re,
    });
    const sub = (x: { re: number; im: number }, y: { re: number; im: number }) => ({
      re: x.re - y.re,
      im: x.im - y.im,
    });
    const div = (x: { re: number; im: number }, y: { re: number; im: number }) => {
      const d = y.re * y.re + y.im * y.im;
      return { re: (x.re * y.re + x.im * y.im) / d, im: (x.im * y.re - x.re * y.im) / d };
    };
    const det = sub(mul(a11, a22), mul(a12, a21));
    const x1 = div(sub(mul(b1, a22), mul(a12, b2)), det);
    const x2 = div(sub(mul(a11, b2), mul(b1, a21)), det);
    const x = leastSquares(
      cmatrixFrom([
        [a11, a12],
        [a21, a22],
      ]),
      cmatrixFrom([[b1], [b2]]),
    );
    expect(getEl(x, 0, 0).re).toBeCloseTo(x1.re, 12);
    expect(getEl(x, 0, 0).im).toBeCloseTo(x1.im, 12);
    expect(getEl(x, 1, 0).re).toBeCloseTo(x2.re, 12);
    expect(getEl(x, 1, 0).im).toBeCloseTo(x2.im, 12);
  });
  it('with more equations than unknowns, the residual is orthogonal to the columns (normal equations A^H r = 0)', () => {
    const rows = [
      [fromPolar(0.05, 30), fromPolar(0.02, 200)],
      [fromPolar(0.015, 310), fromPolar(0.06, 80)],
      [fromPolar(0.04, 45), fromPolar(0.01, 170)],
      [fromPolar(0.02, 300), fromPolar(0.05, 95)],
    ];
    const b = [fromPolar(3, 120), fromPolar(1.5, 250), fromPolar(2.6, 140), fromPolar(0.4, 10)];
    const x = leastSquares(cmatrixFrom(rows), cmatrixFrom(b.map((v) => [v])));
    const x0 = getEl(x, 0, 0);
    const x1 = getEl(x, 1, 0);
    const mul = (p: { re: number; im: number }, q: { re: number; im: number }) =>
      complex(p.re * q.re - p.im * q.im, p.re * q.im + p.im * q.re);
    for (let j = 0; j < 2; j++) {
      let re = 0;
      let im = 0;
      rows.forEach((row, i) => {
        const fit = mul(row[0]!, x0);
        const fit1 = mul(row[1]!, x1);
        const r = complex(fit.re + fit1.re - b[i]!.re, fit.im + fit1.im - b[i]!.im);
        const d = mul(complex(row[j]!.re, -row[j]!.im), r);
        re += d.re;
        im += d.im;
      });
      expect(Math.hypot(re, im)).toBeLessThan(1e-12);
    }
    // and it is a real fit, not an exact solve: the residual itself is not zero
    expect(
      Math.hypot(
        b[2]!.re - mul(rows[2]![0]!, x0).re - mul(rows[2]![1]!, x1).re,
        b[2]!.im - mul(rows[2]![0]!, x0).im - mul(rows[2]![1]!, x1).im,
      ),
    ).toBeGreaterThan(0.1);
  });
});

describe('splitting a weight onto fixed positions (law of sines, checked by hand)', () => {
  it('the CLI contract example: 62.4 g at 250 deg, r 355.6 mm onto 9 positions at r 406.4 mm', () => {
    // Hand computation: moved mass 62.4 x 355.6 / 406.4 = 54.6 g; positions 40 deg apart, so
    // 250 deg lies between position 6 (240 deg, 10 deg away) and 7 (280 deg, 30 deg away):
    //   W6 = 54.6 sin 30 / sin 40 = 42.47 g,  W7 = 54.6 sin 10 / sin 40 = 14.75 g.
    const moved = moveToRadius(62.4, 355.6, 406.4);
    expect(moved).toBeCloseTo(54.6, 10);
    const parts = splitOntoPositions(moved, 250, { count: 9, first_deg: 0 });
    expect(parts.map((p) => [p.position, p.angle_deg])).toEqual([
      [6, 240],
      [7, 280],
    ]);
    expect(parts[0]!.mass_g).toBeCloseTo((54.6 * Math.sin(30 * D2R)) / Math.sin(40 * D2R), 10);
    expect(parts[0]!.mass_g).toBeCloseTo(42.47, 2);
    expect(parts[1]!.mass_g).toBeCloseTo(14.75, 2);
    // The parts add up, as vectors, to the weight.
    const back = combineWeights(parts);
    expect(back.mass_g).toBeCloseTo(54.6, 10);
    expect(back.angle_deg).toBeCloseTo(250, 10);
  });

  it('wraps past the last position and honours first_deg', () => {
    // 10 positions from 5 deg: 5, 41, ..., 329. 350 deg lies between 329 (position 9) and
    // 365 = 5 (position 0).
    const parts = splitOntoPositions(30, 350, { count: 10, first_deg: 5 });
    expect(parts.map((p) => p.position)).toEqual([0, 9]);
    expect(parts[1]!.mass_g).toBeCloseTo((30 * Math.sin(15 * D2R)) / Math.sin(36 * D2R), 10);
    expect(parts[0]!.mass_g).toBeCloseTo((30 * Math.sin(21 * D2R)) / Math.sin(36 * D2R), 10);
  });

  it('a weight on a position goes there whole; fewer than 3 positions is refused', () => {
    expect(splitOntoPositions(12, 120, { count: 6, first_deg: 0 })).toEqual([
      { position: 2, angle_deg: 120, mass_g: 12 },
    ]);
    expect(splitOntoPositions(12, 359.9999999999, { count: 6, first_deg: 0 })).toEqual([
      { position: 0, angle_deg: 0, mass_g: 12 },
    ]);
    expect(() => splitOntoPositions(12, 30, { count: 2, first_deg: 0 })).toThrow(/at least 3/);
  });
});

describe('combining weights (by hand)', () => {
  it('20 g at 0 deg and 20 g at 90 deg act as 28.28 g at 45 deg', () => {
    const w = combineWeights([
      { mass_g: 20, angle_deg: 0 },
      { mass_g: 20, angle_deg: 90 },
    ]);
    expect(w.mass_g).toBeCloseTo(20 * Math.SQRT2, 12);
    expect(w.angle_deg).toBeCloseTo(45, 12);
  });

  it('weights at different radii combine by unbalance m*r', () => {
    // 10 g at 100 mm, 0 deg + 10 g at 300 mm, 90 deg = (1000, 3000) g mm -> 3162.3 g mm at
    // 71.57 deg -> 15.81 g at 200 mm.
    const w = combineWeights(
      [
        { mass_g: 10, angle_deg: 0, radius_mm: 100 },
        { mass_g: 10, angle_deg: 90, radius_mm: 300 },
      ],
      200,
    );
    expect(w.mass_g).toBeCloseTo(Math.hypot(1000, 3000) / 200, 12);
    expect(w.angle_deg).toBeCloseTo(Math.atan2(3, 1) / D2R, 12);
    expect(() =>
      combineWeights(
        [
          { mass_g: 1, angle_deg: 0, radius_mm: 10 },
          { mass_g: 1, angle_deg: 0 },
        ],
        10,
      ),
    ).toThrow();
  });
});

describe('trial weight, force and ISO 21940-11 (textbook force, common-practice trial rule, ISO 21940-11 from memory)', () => {
  it('centrifugal force: 50 g at 600 mm at 1480 r/min is about 720 N (F = m r omega^2, textbook; own computation)', () => {
    expect(centrifugalForceN(50, 600, 1480)).toBeGreaterThan(715);
    expect(centrifugalForceN(50, 600, 1480)).toBeLessThan(725);
  });

  it('trial weight: its force is 10 % of the rotor weight on one bearing (common practice)', () => {
    // Invented Kessrow ID-3A fan: 850 kg rotor on two bearings, weights at 600 mm, 1485 r/min.
    const m = suggestTrialMassG(425, 600, 1485);
    // By hand: 0.1 * 425 * 9.80665 / (0.6 * (1485 * 2 pi / 60)^2) = 0.02872 kg.
    expect(m).toBeCloseTo(28.72, 2);
    expect(centrifugalForceN(m, 600, 1485)).toBeCloseTo(0.1 * 425 * STANDARD_GRAVITY, 9);
    expect(suggestTrialMassG(425, 600, 1485, 0.05)).toBeCloseTo(m / 2, 12);
  });

  it('U_per: 500 kg, 1480 r/min, G6.3 gives about 20 300 g mm (ISO 21940-11, from memory)', () => {
    const u = permissibleUnbalanceGmm(6.3, 500, 1480);
    expect(Math.abs(u - 20300) / 20300).toBeLessThan(0.005);
    // The rounded constant 9549 = 60000 / (2 pi) agrees to 1 part in 10^4.
    expect(Math.abs(u - (9549 * 6.3 * 500) / 1480) / u).toBeLessThan(1e-4);
  });

  it('reads grades written as G6.3, 6.3 or g2.5', () => {
    expect(parseGrade('G6.3')).toBe(6.3);
    expect(parseGrade(' g2.5 ')).toBe(2.5);
    expect(parseGrade('6.3')).toBe(6.3);
    expect(parseGrade('G')).toBeNaN();
    expect(parseGrade('six')).toBeNaN();
  });
});
