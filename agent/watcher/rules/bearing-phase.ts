import { deg, Finding, type WatcherRule } from './types.js';

/**
 * Bearing to bearing in one direction (common practice): near 0 deg -> static (force) unbalance,
 * one correction plane; near 180 -> couple; in between -> dynamic, two planes.
 */
export const bearingPhase: WatcherRule = {
  name: 'bearing-phase',
  summary:
    'radial 1x of the two rotor bearings in one direction: in ' +
    'phase -> static, opposed -> couple, between -> dynamic (common practice)',
  run({ s, pairRelation, measures }) {
    const f = new Finding();
    if (!s.bearings) {
      f.limits.push(
        'only one bearing has radial sensors: static, ' +
          'couple and dynamic unbalance cannot be told apart',
      );
      f.missing += 3;
      return f.done();
    }
    const [b1, b2] = s.bearings;
    const pairs = (['vertical', 'horizontal'] as const).flatMap((d) => pairRelation(d) ?? []);
    measures.bearing_pair = { bearings: s.bearings, directions: pairs };
    if (pairs.length === 0) {
      f.limits.push(
        `no direction has healthy 1x readings at both ${b1} and ${b2}: ` +
          `static, couple and dynamic unbalance cannot be told apart`,
      );
      f.missing += 3;
      return f.done();
    }
    for (const p of pairs) {
      const meaning =
        p.relation === 'in_phase'
          ? 'in phase (static pattern)'
          : p.relation === 'opposed'
            ? 'opposed (couple pattern)'
            : 'neither in phase nor opposed (dynamic pattern)';
      f.evidence.push(
        `${p.direction}: ${b1} and ${b2} 1x are ${deg(p.phase_diff_deg)} apart, ${meaning}`,
      );
    }
    const rels = new Set(pairs.map((p) => p.relation));
    f.facts.pair_kind =
      rels.size === 1 && rels.has('in_phase')
        ? 'static'
        : rels.size === 1 && rels.has('opposed')
          ? 'couple'
          : 'dynamic';
    if (rels.has('in_phase') && rels.has('opposed')) {
      f.limits.push('vertical and horizontal disagree between the bearings: reported as dynamic');
      f.missing += 1;
    }
    return f.done();
  },
};
