import { describe, expect, it } from 'vitest';
import { combineWeights, moveToRadius, splitBetweenHoles, SplitRefused } from '../agent/balance/weights.js';

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
    // published: 2.2 x 14 / 16 = 1.925 oz at the bolts' radius. The split itself is a hand computation
    // here (own computation): W240 = 1.925 sin 30 / sin 40, W280 = 1.925 sin 10 / sin 40.
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
    expect(s.weights.find((w) => w.angle_deg === 235)!.mass_g).toBeCloseTo((62.4 * Math.sin(40 * D2R)) / Math.sin(55 * D2R), 12);
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
    expect(splitBetweenHoles(20, 200, [100, 340, 15, 200]).weights).toEqual([{ position: 3, angle_deg: 200, mass_g: 20 }]);
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
