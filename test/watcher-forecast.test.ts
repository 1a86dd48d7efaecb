import { mkdirSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { StoredCoefficients } from '../agent/balance/coefficients.js';
import type { Baseline } from '../agent/watcher/baseline.js';
import {
  abs,
  add,
  angleDeg,
  conj,
  fromPolar,
  mul,
  scale,
  sub,
  type Complex,
} from '../agent/watcher/complex.js';
import { forecastBalance } from '../agent/watcher/forecast.js';
import { resolveWatcherSettings } from '../agent/watcher/settings.js';
import { assessHealth } from '../agent/watcher/health.js';
import { openWatcher } from '../agent/watcher/watcher.js';
import { FakeClock } from './support/fake-clock.js';
import { demoConfig, synthWindow, type Vec } from './support/fan-windows.js';

/**
 * Influence-coefficient method (common practice): V = V0 + H W; one
 * plane W = -V0 / H; two planes W = -H^-1 V0; with more sensors than planes, least squares. Here
 * the "V0" is the change from baseline, so the forecast weight brings the 1x vectors back to
 * baseline.
 */

const cfg = demoConfig();
const s = resolveWatcherSettings(cfg);
const coeffs = (
  c: StoredCoefficients['coefficients'],
  planes = ['P1'],
  speed = 1485,
): StoredCoefficients => ({
  version: 1,
  asset: 'kessrow-id3a',
  saved_at: '2031-01-10T09:00:00.000Z',
  job_id: 'job-7',
  angle_convention: 'against_rotation',
  speed_rpm: speed,
  planes,
  coefficients: c,
});
const baseline = (ch: Record<string, Vec>): Baseline => ({
  version: 1,
  asset: 'kessrow-id3a',
  source: 'learned',
  learned_at: '2031-01-10T10:00:00.000Z',
  windows: 6,
  speed_rpm: 1485,
  channels: Object.fromEntries(
    Object.entries(ch).map(([id, v]) => [
      id,
      { one_x_rms_mm_s: v.amp, one_x_phase_deg: v.phase, overall_rms_mm_s: null },
    ]),
  ),
});
/** A window whose 1x peak vectors are the given complex numbers (r.m.s. = peak / sqrt 2). */
const windowOf = (pk: Record<string, Complex>) =>
  synthWindow({
    oneX: Object.fromEntries(
      Object.entries(pk).map(([id, v]) => [id, { amp: abs(v) / Math.SQRT2, phase: angleDeg(v) }]),
    ),
  });

describe('balance forecast from stored coefficients', () => {
  it('one plane, by hand: change 3.0 mm/s pk at 120 deg, H = 0.05 mm/s pk per g at 30 deg -> 60 g at 270 deg', () => {
    // W = -dV / H = -(3.0 / 0.05) at (120 - 30) = -60 g at 90 deg = 60 g at 270 deg.
    const base = baseline({ 'DE-V': { amp: 1.0, phase: 40 } });
    const vNow = add(fromPolar(1.0 * Math.SQRT2, 40), fromPolar(3.0, 120));
    const w = windowOf({ 'DE-V': vNow });
    const f = forecastBalance(
      'kessrow-id3a',
      coeffs({ 'DE-V': { P1: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 } } }),
      base,
      w,
      assessHealth(w, s),
    );
    expect(f.available).toBe(true);
    expect(f.target).toBe('baseline');
    expect(f.weights[0]!.mass_g).toBeCloseTo(60, 6);
    expect(f.weights[0]!.angle_deg).toBeCloseTo(270, 6);
    expect(f.residual_pk_mm_s!).toBeLessThan(1e-9);
    expect(f.why).toMatch(/weight angles from the reference mark, against rotation/);
    expect(f.cautions.join(' ')).toMatch(/Lock out and tag out/);
  });

  it('the same job counted WITH rotation: 270 deg against rotation is 90 deg with it (H does not depend on the convention)', () => {
    // agent/balance/conventions.ts: H is the response to 1 g on the reference mark; a weight beta
    // degrees with rotation adds H m e^(-i beta), so every weight angle changes sign.
    const base = baseline({ 'DE-V': { amp: 1.0, phase: 40 } });
    const w = windowOf({ 'DE-V': add(fromPolar(1.0 * Math.SQRT2, 40), fromPolar(3.0, 120)) });
    const withRot = {
      ...coeffs({ 'DE-V': { P1: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 } } }),
      angle_convention: 'with_rotation' as const,
    };
    const f = forecastBalance('kessrow-id3a', withRot, base, w, assessHealth(w, s));
    expect(f.weights[0]!.mass_g).toBeCloseTo(60, 6);
    expect(f.weights[0]!.angle_deg).toBeCloseTo(90, 6);
    expect(f.why).toMatch(/weight angles from the reference mark, with rotation/);
  });

  it('two planes, four sensors: recovers the weight set that explains the change', () => {
    const h: Record<string, [Complex, Complex]> = {
      'DE-V': [fromPolar(0.05, 30), fromPolar(0.02, 200)],
      'DE-H': [fromPolar(0.04, 120), fromPolar(0.015, 290)],
      'NDE-V': [fromPolar(0.015, 310), fromPolar(0.06, 80)],
      'NDE-H': [fromPolar(0.012, 40), fromPolar(0.05, 170)],
    };
    const wTrue = [fromPolar(40, 200), fromPolar(25, 75)];
    // The fan drifted from zero by -H W_true, so W_true brings it back (V = V0 + H W).
    const pk: Record<string, Complex> = {};
    for (const [id, [h1, h2]] of Object.entries(h))
      pk[id] = scale(add(mul(h1, wTrue[0]!), mul(h2, wTrue[1]!)), -1);
    const stored = coeffs(
      Object.fromEntries(
        Object.entries(h).map(([id, [h1, h2]]) => [
          id,
          {
            P1: { amp_mm_s_pk_per_g: abs(h1), phase_deg: angleDeg(h1) },
            P2: { amp_mm_s_pk_per_g: abs(h2), phase_deg: angleDeg(h2) },
          },
        ]),
      ),
      ['P1', 'P2'],
    );
    const w = windowOf(pk);
    const f = forecastBalance('kessrow-id3a', stored, null, w, assessHealth(w, s));
    expect(f.target).toBe('zero');
    expect(f.sensors_used).toEqual(['DE-V', 'DE-H', 'NDE-V', 'NDE-H']);
    expect(f.weights.map((x) => x.plane)).toEqual(['P1', 'P2']);
    expect(f.weights[0]!.mass_g).toBeCloseTo(40, 6);
    expect(f.weights[0]!.angle_deg).toBeCloseTo(200, 6);
    expect(f.weights[1]!.mass_g).toBeCloseTo(25, 6);
    expect(f.weights[1]!.angle_deg).toBeCloseTo(75, 6);
    expect(f.condition!).toBeLessThan(20);
  });

  it('says why there is no forecast', () => {
    const w = windowOf({ 'DE-V': fromPolar(2, 40) });
    const h = assessHealth(w, s);
    const one = coeffs({ 'DE-V': { P1: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 } } });
    expect(forecastBalance('kessrow-id3a', null, null, w, h).why).toMatch(
      /no influence coefficients stored/,
    );
    expect(forecastBalance('kessrow-id3a', { ...one, asset: 'other-fan' }, null, w, h).why).toMatch(
      /belong to asset "other-fan"/,
    );
    const two = coeffs(
      {
        'DE-V': {
          P1: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 },
          P2: { amp_mm_s_pk_per_g: 0.02, phase_deg: 200 },
        },
      },
      ['P1', 'P2'],
    );
    expect(forecastBalance('kessrow-id3a', two, null, w, h).why).toMatch(
      /1 healthy sensor\(s\) with coefficients for 2 plane\(s\)/,
    );
    const far = forecastBalance('kessrow-id3a', coeffs(one.coefficients, ['P1'], 1200), null, w, h);
    // two sensors that see both planes alike cannot tell the planes apart: no confident wrong
    // answer
    const w2 = windowOf({ 'DE-V': fromPolar(2, 40), 'NDE-V': fromPolar(1, 70) });
    const same = {
      P1: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 },
      P2: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 },
    };
    const singular = forecastBalance(
      'kessrow-id3a',
      coeffs({ 'DE-V': same, 'NDE-V': same }, ['P1', 'P2']),
      null,
      w2,
      assessHealth(w2, s),
    );
    expect(singular).toMatchObject({ available: false, weights: [] });
    expect(singular.why).toMatch(/cannot separate the planes .*singular/);
    expect(far.notes.join(' ')).toMatch(/measured at 1200 r\/min, the fan runs at 1485 r\/min/);
  });

  it('the live watcher reads <state_dir>/balance/coefficients.json and survives a broken one', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-fc-'));
    mkdirSync(join(dir, 'balance'));
    const file = join(dir, 'balance', 'coefficients.json');
    writeFileSync(
      file,
      JSON.stringify(coeffs({ 'DE-V': { P1: { amp_mm_s_pk_per_g: 0.05, phase_deg: 30 } } })),
    );
    const w = openWatcher(
      demoConfig({ state_dir: dir }),
      new FakeClock(Date.parse('2031-03-02T08:00:00Z')),
    );
    const st = w.process(windowOf({ 'DE-V': fromPolar(3.0, 120) })).status;
    expect(st.forecast!.available).toBe(true);
    // no baseline: back to zero, W = -V / H
    expect(st.forecast!.weights[0]!.mass_g).toBeCloseTo(60, 6);
    writeFileSync(file, '{"version": 1, "asset": ');
    w.reloadCoefficients();
    const broken = w.process(windowOf({ 'DE-V': fromPolar(3.0, 120) })).status.forecast!;
    expect(broken.available).toBe(false);
    expect(broken.why).toMatch(/coefficients\.json: not valid JSON/);
  });
});
