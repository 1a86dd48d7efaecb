import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import type { JobRun } from '../agent/balance/job.js';
import { parseMultiSpeed } from '../agent/balance/job-input.js';
import {
  solveMultiSpeed,
  type MultiSpeedJob,
  type SpeedGroup,
} from '../agent/balance/multi-speed.js';
import { measure, type Rig, type RigMass } from './balance-rig.js';

const PYTHON = existsSync('/usr/bin/python3') ? '/usr/bin/python3' : 'python3';

function angleDiff(a: number, b: number): number {
  return ((((a - b) % 360) + 540) % 360) - 180;
}

/**
 * A variable-speed fan built from geometry (test/balance-rig.ts): response per plane and sensor
 * changes with speed (invented figures).
 */
function rigAt(rpm: number, sensors: string[] = ['DE-V', 'NDE-V'], flipP2 = false): Rig {
  // below the first critical speed the response grows roughly with speed squared (common practice)
  const k = (rpm / 1485) ** 2;
  const lag = (base: number) => base + 40 * (rpm / 1485); // lag grows with speed (invented)
  const all = [
    {
      id: 'DE-V',
      mountDeg: 90,
      planes: [
        { gain: 0.06 * k, lagDeg: lag(20) },
        { gain: 0.025 * k, lagDeg: lag(flipP2 && rpm > 1200 ? 240 : rpm > 1200 ? 95 : 30) },
      ],
    },
    {
      id: 'NDE-V',
      mountDeg: 90,
      planes: [
        { gain: 0.02 * k, lagDeg: lag(60) },
        { gain: 0.055 * k, lagDeg: lag(25) },
      ],
    },
  ];
  return { rotation: 'ccw', pickupDeg: 10, sensors: all.filter((s) => sensors.includes(s.id)) };
}

const mass = (plane: number, mass_g: number, angle_deg: number): RigMass => ({
  plane,
  mass_g,
  angle_deg,
  convention: 'against_rotation',
});

/**
 * As found and one trial run per job plane at one speed; noise: a deterministic jiggle of the
 * readings, fraction of amplitude.
 */
function group(
  rpm: number,
  U: RigMass[],
  planes: number[],
  opts: { sensors?: string[]; flipP2?: boolean; noise?: number; weight?: number } = {},
): SpeedGroup {
  const rig = rigAt(rpm, opts.sensors, opts.flipP2);
  let seed = Math.round(rpm);
  const jiggle = (r: Record<string, { amp: number; phase_deg: number }>) => {
    if (!opts.noise) return r;
    return Object.fromEntries(
      Object.entries(r).map(([id, v]) => {
        seed = (seed * 1103515245 + 12345) % 2147483648;
        const u = seed / 2147483648 - 0.5;
        return [
          id,
          { amp: v.amp * (1 + opts.noise! * u), phase_deg: v.phase_deg + 100 * opts.noise! * u },
        ];
      }),
    );
  };
  const runs: JobRun[] = [{ weights: [], readings: jiggle(measure(rig, U)) }];
  for (const p of planes)
    runs.push({
      weights: [{ plane: `P${p + 1}`, mass_g: 60, angle_deg: 0 }],
      readings: jiggle(measure(rig, [...U, mass(p, 60, 0)])),
    });
  return { speed_rpm: rpm, runs, ...(opts.weight ? { weight: opts.weight } : {}) };
}

/**
 * numpy.linalg.lstsq on the stacked system, with the coefficients computed in Python from the raw
 * runs (reference library; independent of the TypeScript chain).
 */
function numpyReference(job: MultiSpeedJob): { mass_g: number; angle_deg: number }[] {
  const script = `
import json, sys, numpy as np
job = json.loads(sys.argv[1])
planes = job['planes']
sensors = sorted(job['speeds'][0]['runs'][0]['readings'].keys())
rows, rhs = [], []
for g in job['speeds']:
    w = g.get('weight', 1.0)
    V = lambda run, s: run['readings'][s]['amp'] * np.exp(1j * np.radians(run['readings'][s]['phase_deg']))
    V0 = {s: V(g['runs'][0], s) for s in sensors}
    H = {s: {} for s in sensors}
    for run in g['runs'][1:]:
        wt = run['weights'][0]
        T = wt['mass_g'] * np.exp(1j * np.radians(wt['angle_deg']))
        for s in sensors: H[s][wt['plane']] = (V(run, s) - V0[s]) / T
    for s in sensors:
        rows.append([w * H[s][p] for p in planes]); rhs.append(-w * V0[s])
C = np.linalg.lstsq(np.array(rows), np.array(rhs), rcond=None)[0]
print(json.dumps([{'mass_g': float(abs(c)), 'angle_deg': float(np.degrees(np.angle(c)) % 360)} for c in C]))
`;
  const r = spawnSync(PYTHON, ['-c', script, JSON.stringify(job)], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`python3/numpy failed: ${r.stderr}`);
  return JSON.parse(r.stdout) as { mass_g: number; angle_deg: number }[];
}

describe('multi-speed least squares', () => {
  const U = [mass(0, 70, 60), mass(1, 35, 250)];

  it('consistent runs at three speeds: the common correction cancels the unbalance at every speed', () => {
    const job: MultiSpeedJob = {
      angle_convention: 'against_rotation',
      planes: ['P1', 'P2'],
      radius_mm: { P1: 500, P2: 500 },
      speeds: [900, 1200, 1485].map((v) => group(v, U, [0, 1])),
    };
    const r = solveMultiSpeed(job);
    expect(r.problems).toEqual([]);
    expect(r.corrections[0]!.mass_g).toBeCloseTo(70, 5);
    expect(Math.abs(angleDiff(r.corrections[0]!.angle_deg, 240))).toBeLessThan(1e-4);
    expect(r.corrections[1]!.mass_g).toBeCloseTo(35, 5);
    expect(Math.abs(angleDiff(r.corrections[1]!.angle_deg, 70))).toBeLessThan(1e-4);
    for (const s of r.speeds) expect(s.residual_share!).toBeLessThan(1e-6);
    // force at the highest speed: 70 g at 500 mm at 1485 r/min (F = m r omega^2)
    expect(r.corrections[0]!.force_n!).toBeCloseTo(
      0.07 * 0.5 * ((1485 * 2 * Math.PI) / 60) ** 2,
      3,
    );
  });

  it('with reading scatter the weighted compromise equals numpy.linalg.lstsq on the stacked system', () => {
    const job: MultiSpeedJob = {
      angle_convention: 'against_rotation',
      planes: ['P1', 'P2'],
      speeds: [
        group(900, U, [0, 1], { noise: 0.08 }),
        group(1200, U, [0, 1], { noise: 0.08, weight: 2 }),
        group(1485, U, [0, 1], { noise: 0.08, weight: 3 }),
      ],
    };
    const r = solveMultiSpeed(job);
    expect(r.ok).toBe(true);
    const ref = numpyReference(job);
    r.corrections.forEach((c, p) => {
      expect(c.mass_g).toBeCloseTo(ref[p]!.mass_g, 6);
      expect(Math.abs(angleDiff(c.angle_deg, ref[p]!.angle_deg))).toBeLessThan(1e-5);
    });
    // the predicted residual per speed is shown and is not zero (the runs disagree a little)
    expect(
      r.speeds.every(
        (s) =>
          s.predicted_residuals.length === 2 && s.residual_share! > 0 && s.residual_share! < 0.5,
      ),
    ).toBe(true);
  });

  it('one sensor, two planes: no single speed can be solved, two speeds together can', () => {
    const job: MultiSpeedJob = {
      angle_convention: 'against_rotation',
      planes: ['P1', 'P2'],
      speeds: [900, 1485].map((v) => group(v, U, [0, 1], { sensors: ['DE-V'] })),
    };
    const r = solveMultiSpeed(job);
    expect(r.ok).toBe(true);
    expect(r.speeds.every((s) => s.own_corrections.length === 0)).toBe(true);
    expect(r.corrections[0]!.mass_g).toBeCloseTo(70, 4);
    expect(r.corrections[1]!.mass_g).toBeCloseTo(35, 4);
  });

  it('speeds that share no common solution: refused with the residual each speed would keep, and what to do', () => {
    // unbalance in P2 only, corrected in P1 only; above 1200 r/min P2's response turns against P1's
    const U2 = [mass(1, 50, 100)];
    const job: MultiSpeedJob = {
      angle_convention: 'against_rotation',
      planes: ['P1'],
      speeds: [900, 1485].map((v) => group(v, U2, [0], { sensors: ['DE-V'], flipP2: true })),
    };
    const r = solveMultiSpeed(job);
    expect(r.ok).toBe(false);
    expect(r.corrections).toEqual([]);
    expect(r.problems[0]!.code).toBe('no_common_solution');
    expect(r.problems[0]!.message).toMatch(/900 r\/min: \d+ %, 1485 r\/min: \d+ %/);
    expect(r.problems[0]!.hint).toMatch(/resonance|add a correction plane/);
    // each speed alone can be balanced, and says so
    expect(r.speeds.every((s) => s.own_corrections.length === 1)).toBe(true);
    // weighting the low speed heavily gives it nearly its own answer, which leaves the top speed
    // WORSE
    // than as found: still refused, even when any share up to the as-found level would be accepted
    const w = solveMultiSpeed({
      ...job,
      max_residual_share: 1,
      speeds: [{ ...job.speeds[0]!, weight: 100 }, job.speeds[1]!],
    });
    expect(w.ok).toBe(false);
    expect(w.speeds[0]!.residual_share!).toBeLessThan(0.05);
    expect(w.speeds[1]!.residual_share!).toBeGreaterThan(1);
  });

  it('speeds that are not distinct, and a single speed, are refused with what to do', () => {
    const r = solveMultiSpeed({
      angle_convention: 'against_rotation',
      planes: ['P1', 'P2'],
      speeds: [group(1485, U, [0, 1]), group(1492, U, [0, 1])],
    });
    expect(r.ok).toBe(false);
    expect(r.problems[0]!.code).toBe('speeds_not_distinct');
    expect(r.problems[0]!.hint).toMatch(/one speed group/);
    expect(() =>
      parseMultiSpeed({ planes: ['P1'], speeds: [group(900, U, [0])] }, 'm.json'),
    ).toThrow(/two or more speeds/);
    expect(() =>
      parseMultiSpeed(
        {
          planes: ['P1'],
          speeds: [
            group(900, U, [0]),
            {
              ...group(1400, U, [0]),
              runs: [{ weights: [{ plane: 'P9', mass_g: 1, angle_deg: 0 }], readings: {} }],
            },
          ],
        },
        'm.json',
      ),
    ).toThrow(/speeds\[1\]\.runs\[0\]/);
  });

  it('a speed whose trial weight did nothing stops the job, naming the speed', () => {
    const g = group(1200, U, [0, 1]);
    const dead = {
      ...g,
      runs: [g.runs[0]!, { ...g.runs[1]!, readings: g.runs[0]!.readings }, g.runs[2]!],
    };
    const r = solveMultiSpeed({
      angle_convention: 'against_rotation',
      planes: ['P1', 'P2'],
      speeds: [group(900, U, [0, 1]), dead],
    });
    expect(r.ok).toBe(false);
    expect(
      r.problems.some(
        (p) => p.code === 'trial_no_effect' && p.message.startsWith('speeds[1] (1200 r/min)'),
      ),
    ).toBe(true);
  });
});
