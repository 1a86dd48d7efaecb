import { describe, expect, it } from 'vitest';
import {
  add,
  centrifugalForceN,
  div,
  influenceCoefficient,
  lagDeg,
  leverShares,
  magnitude,
  mul,
  receptance,
  rpmToRadS,
  scale,
  STANDARD_GRAVITY_M_S2,
  sub,
  unbalancePhasor,
  unbalanceVelocity,
  ZERO,
  type Phasor,
  type SensorPlace,
} from '../drivers/sim/physics.js';
import { angleDiff, plan, testConfig, testScenario } from './sim-fixtures.js';

const omega = rpmToRadS(1500);
const p = plan();
const g = p.geometry;
const DE_V: SensorPlace = { bearing: 0, direction: 'vertical', mounting_angle_deg: 0 };
const DE_H: SensorPlace = { bearing: 0, direction: 'horizontal', mounting_angle_deg: 0 };
const NDE_V: SensorPlace = { bearing: 1, direction: 'vertical', mounting_angle_deg: 0 };
const NDE_H: SensorPlace = { bearing: 1, direction: 'horizontal', mounting_angle_deg: 0 };
const u = (grams: number, angle: number) => unbalancePhasor(grams, 760, angle, 'against_rotation');

describe('physics of the simulated rotor', () => {
  it('uses standard gravity 9.80665 m/s^2 (3rd CGPM, 1901)', () => {
    expect(STANDARD_GRAVITY_M_S2).toBe(9.80665);
  });

  it('gives the centrifugal force F = m r omega^2 (textbook; own computation: 50 g at 600 mm at 1480 r/min is about 720 N)', () => {
    const f = centrifugalForceN(0.05, 0.6, rpmToRadS(1480));
    expect(f).toBeCloseTo(0.05 * 0.6 * ((1480 * 2 * Math.PI) / 60) ** 2, 9);
    expect(Math.abs(f - 720)).toBeLessThan(5);
  });

  it('shares a plane force between the bearings by statics: forces and moments balance (beam on two supports, textbook)', () => {
    for (const z of [0, 700, 1200, 2400, 3000, -500]) {
      const [a, b] = leverShares(0, 2400, z);
      expect(a + b).toBeCloseTo(1, 12); // sum of vertical forces
      expect(a * 0 + b * 2400).toBeCloseTo(z, 9); // moments about bearing A
    }
    const [near, far] = leverShares(0, 2400, 3000); // overhung outboard of B
    expect(far).toBeGreaterThan(1);
    expect(near).toBeLessThan(0);
  });

  it('has the single-degree-of-freedom receptance: 1/k at low speed, 1/(2 zeta k) and 90 deg lag at resonance (textbook SDOF response, e.g. Rao, Mechanical Vibrations, ch. 3; from memory)', () => {
    const s = { stiffness_n_per_m: 30e6, natural_hz: 40, damping_ratio: 0.05 };
    const low = receptance(s, 2 * Math.PI * 0.01);
    expect(magnitude(low) * 30e6).toBeCloseTo(1, 6);
    const res = receptance(s, 2 * Math.PI * 40);
    expect(magnitude(res)).toBeCloseTo(1 / (2 * 0.05 * 30e6), 15);
    expect(lagDeg(res)).toBeCloseTo(90, 9);
    // below the first critical speed the high spot lags the heavy spot by less than 90 deg
    // (textbook rotor dynamics, from memory)
    for (const hz of [5, 20, 35, 39])
      expect(lagDeg(receptance(s, 2 * Math.PI * hz))).toBeLessThan(90);
    expect(lagDeg(receptance(s, 2 * Math.PI * 60))).toBeGreaterThan(90);
  });

  it('computes the 1x velocity from F = m r omega^2, the lever rule and the receptance, written out independently here', () => {
    const uu = [u(40, 30), ZERO];
    const v = unbalanceVelocity(g, DE_V, uu, omega);
    const F = centrifugalForceN(0.04, 0.76, omega) * ((2400 - 1000) / 2400);
    const sV = g.bearings[0].support.vertical;
    const r = omega / (2 * Math.PI * sV.natural_hz);
    const X = F / sV.stiffness_n_per_m / Math.hypot(1 - r * r, 2 * sV.damping_ratio * r);
    const lagG = (Math.atan2(2 * sV.damping_ratio * r, 1 - r * r) * 180) / Math.PI;
    expect(magnitude(v)).toBeCloseTo(omega * X, 12);
    // velocity lag = sensor angle (0) + weight angle (30) + receptance lag - 90 (velocity leads
    // displacement by 90, textbook)
    expect(angleDiff(lagDeg(v), 30 + lagG - 90)).toBeCloseTo(0, 9);
  });

  it('responds linearly: the response to two unbalances is the sum of the responses (superposition)', () => {
    const a = [u(40, 30), u(15, 250)];
    const b = [u(22, 110), u(60, 10)];
    for (const at of [DE_V, DE_H, NDE_V, NDE_H]) {
      const sum = unbalanceVelocity(g, at, [add(a[0]!, b[0]!), add(a[1]!, b[1]!)], omega);
      const parts = add(unbalanceVelocity(g, at, a, omega), unbalanceVelocity(g, at, b, omega));
      expect(magnitude(sub(sum, parts))).toBeLessThan(1e-12 * magnitude(sum));
    }
  });

  it('keeps influence coefficients constant at constant speed, and a weight moved by D deg against rotation moves the phase lag by +D', () => {
    const base = [u(40, 30), ZERO];
    const trial = (angle: number) =>
      sub(
        unbalanceVelocity(g, NDE_H, [add(base[0]!, u(25, angle)), ZERO], omega),
        unbalanceVelocity(g, NDE_H, base, omega),
      );
    const h0 = div(trial(0), u(25, 0));
    const h1 = div(trial(137), u(25, 137));
    expect(magnitude(sub(h0, h1))).toBeLessThan(1e-12 * magnitude(h0));
    expect(angleDiff(lagDeg(trial(137)), lagDeg(trial(0)))).toBeCloseTo(137, 9);
    // with the with-rotation convention the same number of degrees goes the other way
    const w = unbalancePhasor(25, 760, 40, 'with_rotation');
    expect(angleDiff(lagDeg(w), -40)).toBeCloseTo(0, 9);
  });

  it('is balanced in one plane by W = -V0 / H (influence-coefficient method, textbook)', () => {
    const as = [u(40, 30), ZERO];
    const v0 = unbalanceVelocity(g, DE_V, as, omega);
    const t = u(20, 0);
    const v1 = unbalanceVelocity(g, DE_V, [add(as[0]!, t), ZERO], omega);
    const h = div(sub(v1, v0), t);
    const w = scale(div(v0, h), -1);
    const after = unbalanceVelocity(g, DE_V, [add(as[0]!, w), ZERO], omega);
    expect(magnitude(after)).toBeLessThan(1e-9 * magnitude(v0));
    // the correction is the unbalance itself, turned 180 deg: 40 g at 210 deg
    expect(magnitude(w) / 0.76e-3).toBeCloseTo(40, 6);
    expect(angleDiff(lagDeg(w), 210)).toBeCloseTo(0, 6);
  });

  it('is balanced in two planes by W = -H^-1 V0 (influence-coefficient method, textbook)', () => {
    const as: Phasor[] = [u(40, 30), u(25, 200)];
    const at = [DE_V, NDE_V];
    const v0 = at.map((s) => unbalanceVelocity(g, s, as, omega));
    const H = at.map((s) => [0, 1].map((pl) => influenceCoefficient(g, s, pl, omega)));
    const det = sub(mul(H[0]![0]!, H[1]![1]!), mul(H[0]![1]!, H[1]![0]!));
    const w1 = scale(div(sub(mul(H[1]![1]!, v0[0]!), mul(H[0]![1]!, v0[1]!)), det), -1);
    const w2 = scale(div(sub(mul(H[0]![0]!, v0[1]!), mul(H[1]![0]!, v0[0]!)), det), -1);
    const after = at.map((s) => unbalanceVelocity(g, s, [add(as[0]!, w1), add(as[1]!, w2)], omega));
    for (let i = 0; i < 2; i++) expect(magnitude(after[i]!)).toBeLessThan(1e-9 * magnitude(v0[i]!));
  });

  it('reads static unbalance in phase at both bearings and couple unbalance 180 deg apart (common practice)', () => {
    // symmetric rotor so both bearings have the same supports: planes at 1000 and 1400, centre of
    // mass at 1200
    const sym = plan(
      testScenario({
        rotor: {
          ...(testScenario().rotor as object),
          planes: [
            { name: 'P1', position_mm: 1000 },
            { name: 'P2', position_mm: 1400 },
          ],
          centre_of_mass_mm: 1200,
        },
      }),
    );
    const gs = sym.geometry;
    const stat = [u(30, 70), u(30, 70)];
    const couple = [u(30, 70), u(30, 250)];
    for (const [a, b] of [
      [DE_V, NDE_V],
      [DE_H, NDE_H],
    ] as const) {
      expect(
        Math.abs(
          angleDiff(
            lagDeg(unbalanceVelocity(gs, a, stat, omega)),
            lagDeg(unbalanceVelocity(gs, b, stat, omega)),
          ),
        ),
      ).toBeLessThan(1);
      expect(
        Math.abs(
          angleDiff(
            lagDeg(unbalanceVelocity(gs, a, couple, omega)),
            lagDeg(unbalanceVelocity(gs, b, couple, omega)),
          ),
        ),
      ).toBeGreaterThan(179);
    }
  });

  it('reads horizontal and vertical about 90 deg apart, H/V ratio below 3 (common practice)', () => {
    for (const [v, h] of [
      [DE_V, DE_H],
      [NDE_V, NDE_H],
    ] as const) {
      const uu = [u(40, 30), u(10, 300)];
      const vv = unbalanceVelocity(g, v, uu, omega);
      const hh = unbalanceVelocity(g, h, uu, omega);
      expect(Math.abs(Math.abs(angleDiff(lagDeg(hh), lagDeg(vv))) - 90)).toBeLessThan(30);
      const ratio = magnitude(hh) / magnitude(vv);
      expect(ratio).toBeGreaterThan(1); // the horizontal support is the softer one here
      expect(ratio).toBeLessThan(3);
    }
  });

  it('reads a sensor on the opposite side 180 deg shifted (common practice; own computation: its axis is reversed)', () => {
    const uu = [u(40, 30), ZERO];
    const a = unbalanceVelocity(g, NDE_V, uu, omega);
    const b = unbalanceVelocity(g, { ...NDE_V, mounting_angle_deg: 180 }, uu, omega);
    expect(Math.abs(angleDiff(lagDeg(a), lagDeg(b)))).toBeCloseTo(180, 9);
    expect(magnitude(b)).toBeCloseTo(magnitude(a), 15);
  });

  it('gives an overhung rotor high axial 1x in phase at both bearings, a centre-hung one little axial (common practice)', () => {
    const over = plan(
      testScenario({
        rotor: {
          ...(testScenario().rotor as object),
          bearings: [
            { name: 'DE', position_mm: 0 },
            { name: 'NDE', position_mm: 900 },
          ],
          planes: [{ name: 'P1', position_mm: 1500 }],
          unbalance: [],
          support: {
            vertical: { stiffness_mn_per_m: 35, natural_hz: 45 },
            horizontal: { stiffness_mn_per_m: 25, natural_hz: 38 },
            axial: { stiffness_mn_per_m: 60, natural_hz: 60 },
            damping_ratio: 0.06,
          },
        },
      }),
      testConfig({ rotor: 'overhung' }),
    ).geometry;
    const A0: SensorPlace = { bearing: 0, direction: 'axial', mounting_angle_deg: 0 };
    const A1: SensorPlace = { bearing: 1, direction: 'axial', mounting_angle_deg: 0 };
    const uu = [u(40, 30)];
    const a0 = unbalanceVelocity(over, A0, uu, omega);
    const a1 = unbalanceVelocity(over, A1, uu, omega);
    // in phase up to the difference of the two housings' own lags (their supports carry different
    // loads)
    expect(Math.abs(angleDiff(lagDeg(a0), lagDeg(a1)))).toBeLessThan(20);
    const radialNear = unbalanceVelocity(
      over,
      { bearing: 1, direction: 'vertical', mounting_angle_deg: 0 },
      uu,
      omega,
    );
    expect(magnitude(a0) / magnitude(radialNear)).toBeGreaterThan(0.3);
    // centre-hung: axial is a few per cent of radial
    const ch = [u(40, 30), ZERO];
    const axialCh = unbalanceVelocity(
      g,
      { bearing: 0, direction: 'axial', mounting_angle_deg: 0 },
      ch,
      omega,
    );
    expect(magnitude(axialCh) / magnitude(unbalanceVelocity(g, DE_V, ch, omega))).toBeLessThan(0.1);
  });

  it('grows the displacement with speed squared well below the first critical speed (common practice)', () => {
    const uu = [u(40, 30), ZERO];
    const x = (w: number) => magnitude(unbalanceVelocity(g, DE_V, uu, w)) / w;
    const w1 = rpmToRadS(150);
    expect(x(2 * w1) / x(w1)).toBeGreaterThan(3.9);
    expect(x(2 * w1) / x(w1)).toBeLessThan(4.1);
  });
});
