import { describe, expect, it } from 'vitest';
import { oneXAmplitude } from '../agent/balance/amplitude.js';
import type { WindowResult } from '../agent/dsp/types.js';
import { fanCase, synthWindow } from './support/fan-windows.js';
import { allocatePermissible, type RotorGeometry } from '../agent/balance/allocation.js';
import { solveBalanceJob } from '../agent/balance/solve.js';
import {
  combineWeights,
  moveToRadius,
  permissibleUnbalanceGmm,
  splitBetweenHoles,
  SplitRefused,
} from '../agent/balance/weights.js';
import { measure, type RigMass, twoBearingRig } from './balance-rig.js';

const D2R = Math.PI / 180;

function refusal(f: () => unknown): SplitRefused {
  try {
    f();
  } catch (e) {
    if (e instanceof SplitRefused) return e;
    throw e;
  }
  throw new Error('expected a SplitRefused');
}

describe('split between holes at any angles (law of sines)', () => {
  it('radius change and split of "Balancing Weights: Radius Changes & Splitting" (Reliabilityweb.com): 2.2 oz at 250 deg, 14 in -> 16 in, bolts at 240 and 280 deg', () => {
    // published: 2.2 x 14 / 16 = 1.925 oz at the bolts' radius. The split itself is a hand
    // computation here (own computation): W240 = 1.925 sin 30 / sin 40, W280 = 1.925 sin
    // 10 / sin 40.
    const moved = moveToRadius(2.2, 14, 16);
    expect(moved).toBeCloseTo(1.925, 10);
    const s = splitBetweenHoles(moved, 250, [240, 280]);
    expect(s.weights.map((w) => w.angle_deg)).toEqual([240, 280]);
    expect(s.weights[0]!.mass_g).toBeCloseTo((1.925 * Math.sin(30 * D2R)) / Math.sin(40 * D2R), 12);
    expect(s.weights[0]!.mass_g).toBeCloseTo(1.4974, 4);
    expect(s.weights[1]!.mass_g).toBeCloseTo(0.52, 4);
    expect(s.warnings).toEqual([]);
  });

  it('two arbitrary holes: the parts add up, as vectors, to the weight (checked by vector sum, own computation)', () => {
    const s = splitBetweenHoles(62.4, 250, [290, 235]);
    expect(s.weights.map((w) => w.position)).toEqual([0, 1]); // numbered as listed
    expect(s.weights.find((w) => w.angle_deg === 235)!.mass_g).toBeCloseTo(
      (62.4 * Math.sin(40 * D2R)) / Math.sin(55 * D2R),
      12,
    );
    const back = combineWeights(s.weights);
    expect(back.mass_g).toBeCloseTo(62.4, 10);
    expect(back.angle_deg).toBeCloseTo(250, 10);
    expect(s.total_mass_g).toBeCloseTo(s.weights[0]!.mass_g + s.weights[1]!.mass_g, 12);
  });

  it('from a list of allowed angles the two nearest either side are used, wrapping past 360', () => {
    const s = splitBetweenHoles(20, 355, [100, 340, 15, 200]);
    expect(s.weights.map((w) => [w.position, w.angle_deg])).toEqual([
      [1, 340],
      [2, 15],
    ]);
    expect(s.gap_deg).toBeCloseTo(35, 12);
    const back = combineWeights(s.weights);
    expect(back.mass_g).toBeCloseTo(20, 10);
    expect(back.angle_deg).toBeCloseTo(355, 10);
    // a weight on a hole goes there whole
    expect(splitBetweenHoles(20, 200, [100, 340, 15, 200]).weights).toEqual([
      { position: 3, angle_deg: 200, mass_g: 20 },
    ]);
  });

  it('holes wide apart: the split is given with a warning that the parts weigh much more than the weight', () => {
    const s = splitBetweenHoles(10, 90, [15, 165]);
    // own computation: each part 10 sin 75 / sin 150 = 19.32 g
    expect(s.weights[0]!.mass_g).toBeCloseTo((10 * Math.sin(75 * D2R)) / Math.sin(150 * D2R), 12);
    expect(s.warnings[0]!.code).toBe('split_heavy');
    expect(s.warnings[0]!.message).toMatch(/3\.86 times/);
  });

  it('refuses holes 180 deg apart with the weight between them, and holes that do not lie either side', () => {
    const opposite = refusal(() => splitBetweenHoles(30, 100, [10, 190]));
    expect(opposite.code).toBe('holes_opposite');
    expect(opposite.message).toMatch(/180 deg apart/);
    expect(opposite.hint).toMatch(/less than 180 deg apart/);
    const outside = refusal(() => splitBetweenHoles(30, 200, [0, 90]));
    expect(outside.code).toBe('not_between');
    expect(outside.message).toMatch(/one part would be negative/);
    const list = refusal(() => splitBetweenHoles(30, 200, [0, 40, 90]));
    expect(list.code).toBe('not_between');
    expect(refusal(() => splitBetweenHoles(30, 200, [50, 50])).code).toBe('holes_coincide');
  });
});

describe('ISO 21940-11 allocation of U_per to the planes (from memory; hand computations)', () => {
  const geo = (
    com: number,
    planes: [number, number],
    rotor: RotorGeometry['rotor'] = 'centre_hung',
  ): RotorGeometry => ({
    rotor,
    bearing_a_mm: 0,
    bearing_b_mm: 1400,
    centre_of_mass_mm: com,
    planes_mm: { P1: planes[0], P2: planes[1] },
  });

  it('symmetric rotor: the allocation gives the equal split', () => {
    const a = allocatePermissible(10000, ['P1', 'P2'], geo(700, [300, 1100]));
    expect(a.method).toBe('iso21940_11_bearing_planes');
    expect(a.by_plane_g_mm).toEqual({ P1: 5000, P2: 5000 });
  });

  it('centre of mass 500 mm from bearing A of a 1400 mm span: A gets 900/1400, B 500/1400 (U_per,A = U_per L_B / L)', () => {
    const a = allocatePermissible(10000, ['P1', 'P2'], geo(500, [300, 1100]));
    expect(a.bearing_planes_g_mm!.A).toBeCloseTo((10000 * 900) / 1400, 9);
    expect(a.by_plane_g_mm.P1).toBeCloseTo(6428.57, 2);
    expect(a.by_plane_g_mm.P2).toBeCloseTo(3571.43, 2);
    expect(a.basis).toMatch(/from memory/);
    // the planes may be listed the other way round: the one nearer bearing A still gets U_per,A
    const b = allocatePermissible(10000, ['P1', 'P2'], { ...geo(500, [1100, 300]) });
    expect(b.by_plane_g_mm.P2).toBeCloseTo(6428.57, 2);
  });

  it('each bearing share is kept within 0.3-0.7 of U_per', () => {
    const a = allocatePermissible(10000, ['P1', 'P2'], geo(100, [300, 1100]));
    expect(a.by_plane_g_mm.P1).toBeCloseTo(7000, 9);
    expect(a.by_plane_g_mm.P2).toBeCloseTo(3000, 9);
    expect(a.warnings.map((w) => w.code)).toEqual(['share_bounded']);
  });

  it('planes close together: a conservative transfer, labelled own derivation', () => {
    // planes at 600 and 800 (200 mm apart < 1400/3); U_A = 10000 x 900/1400 at com 500.
    // a = (1400 - z)/1400: 800/1400 + 600/1400 = 1; b = z/1400: 600/1400 + 800/1400 = 1
    // u = min(U_A / 1, U_B / 1) = U_B = 3571.4 g mm in each plane (own computation)
    const a = allocatePermissible(10000, ['P1', 'P2'], geo(500, [600, 800]));
    expect(a.method).toBe('iso21940_11_with_conservative_transfer');
    expect(a.by_plane_g_mm.P1).toBeCloseTo((10000 * 500) / 1400, 9);
    expect(a.by_plane_g_mm.P2).toBeCloseTo((10000 * 500) / 1400, 9);
    expect(a.basis).toMatch(/own derivation/);
  });

  it('centre of mass outside the bearings of a centre-hung rotor: a warning with what to do, and only the stated fallback', () => {
    const a = allocatePermissible(10000, ['P1', 'P2'], geo(1600, [300, 1100]));
    expect(a.method).toBe('equal_split_fallback');
    expect(a.by_plane_g_mm).toEqual({ P1: 5000, P2: 5000 });
    expect(a.warnings[0]!.code).toBe('com_outside_bearings');
    expect(a.warnings[0]!.hint).toMatch(/overhung/);
    const o = allocatePermissible(10000, ['P1', 'P2'], geo(1600, [1500, 1700], 'overhung'));
    expect(o.method).toBe('equal_split_fallback');
    expect(o.warnings[0]!.code).toBe('overhung_rules');
  });

  it('no geometry: the equal split, stated as the fallback; one plane takes all', () => {
    const a = allocatePermissible(10000, ['P1', 'P2']);
    expect(a.method).toBe('equal_split_fallback');
    expect(a.basis).toMatch(/fallback/);
    expect(allocatePermissible(10000, ['P1']).by_plane_g_mm).toEqual({ P1: 10000 });
  });

  it("the solver judges the last run against each plane's allocated share, not the equal split", () => {
    const rig = twoBearingRig('ccw');
    // residual unbalance after balancing: 50 g at 120 mm in P1 = 6000 g mm, 10 g in P2 = 1200 g mm
    const U: RigMass[] = [
      { plane: 0, mass_g: 50, angle_deg: 40, convention: 'against_rotation' },
      { plane: 1, mass_g: 10, angle_deg: 200, convention: 'against_rotation' },
    ];
    const t = (plane: number): RigMass => ({
      plane,
      mass_g: 40,
      angle_deg: 0,
      convention: 'against_rotation',
    });
    const job = {
      angle_convention: 'against_rotation' as const,
      planes: ['P1', 'P2'],
      radius_mm: { P1: 120, P2: 120 },
      rotor_mass_kg: 250,
      grade_mm_s: 6.3,
      runs: [
        { speed_rpm: 1485, weights: [], readings: measure(rig, U) },
        {
          speed_rpm: 1485,
          weights: [{ plane: 'P1', mass_g: 40, angle_deg: 0 }],
          readings: measure(rig, [...U, t(0)]),
        },
        {
          speed_rpm: 1485,
          weights: [{ plane: 'P2', mass_g: 40, angle_deg: 0 }],
          readings: measure(rig, [...U, t(1)]),
        },
        { speed_rpm: 1485, weights: [], readings: measure(rig, U) },
      ],
    };
    const per = permissibleUnbalanceGmm(6.3, 250, 1485); // about 10 128 g mm
    const equal = solveBalanceJob(job);
    expect(equal.unbalance!.allocation!.method).toBe('equal_split_fallback');
    expect(equal.unbalance!.last_run_g_mm.P1).toBeCloseTo(6000, 3);
    expect(equal.unbalance!.last_run_within_grade).toBe(false); // 6000 > per / 2
    // centre of mass near P1's bearing: P1 may keep 0.7 x U_per = 7090 g mm, P2 0.3 x U_per = 3038
    const near = solveBalanceJob({
      ...job,
      geometry: {
        rotor: 'centre_hung',
        bearing_a_mm: 0,
        bearing_b_mm: 1000,
        centre_of_mass_mm: 250,
        planes_mm: { P1: 150, P2: 850 },
      },
    });
    expect(near.unbalance!.permissible_by_plane_g_mm!.P1).toBeCloseTo(0.7 * per, 6);
    expect(near.unbalance!.last_run_within_grade).toBe(true);
  });
});

describe('the 1x amplitude for the four-run method from one analysis window', () => {
  const base = synthWindow(fanCase('static', { amp: 3 }));
  const de = base.channels.find((c) => c.id === 'DE-H')!;

  it('with the tach working: the synchronous 1x amplitude', () => {
    const a = oneXAmplitude(base, 'DE-H', 1485);
    expect(a.source).toBe('tach');
    expect(a.amp_pk_mm_s).toBe(de.orders['1']!.amp_pk_mm_s);
  });

  it('without the tach: the spectral peak near the stated speed, as zero-to-peak; an upper bound when it is below the threshold', () => {
    const noTach = (peaks: { freq_hz: number; amp_rms_mm_s: number }[]): WindowResult => ({
      ...base,
      revolutions: 0,
      speed_rpm: null,
      channels: base.channels.map((c) => ({
        ...c,
        orders: {},
        nonsync_peaks: peaks.map((p) => ({
          ...p,
          order: null,
        })) as unknown as typeof c.nonsync_peaks,
      })),
    });
    const a = oneXAmplitude(
      noTach([
        { freq_hz: 247.5, amp_rms_mm_s: 0.3 },
        { freq_hz: 24.6, amp_rms_mm_s: 2.0 },
      ]),
      'DE-H',
      1485,
    );
    expect(a).toMatchObject({ source: 'spectrum', upper_bound: false, amp_rms_mm_s: 2.0 });
    expect(a.amp_pk_mm_s).toBeCloseTo(2.0 * Math.SQRT2, 12);
    const b = oneXAmplitude(noTach([{ freq_hz: 247.5, amp_rms_mm_s: 0.3 }]), 'DE-H', 1485);
    expect(b.upper_bound).toBe(true);
    expect(b.amp_rms_mm_s).toBeCloseTo(0.02 * de.overall_rms_mm_s!, 12);
    expect(() => oneXAmplitude(noTach([]), 'DE-H', 1485)).toThrow(
      /no spectral peak within 5 % of 1485 r\/min/,
    );
    expect(() => oneXAmplitude(base, 'XX', 1485)).toThrow(/sensor XX/);
  });
});
