import { Finding, median, pct, type WatcherRule } from './types.js';

/**
 * 1x dominates the radial readings with unbalance (common practice): its share of the overall
 * r.m.s.
 */
export const oneXShare: WatcherRule = {
  name: 'one-x-share',
  summary:
    '1x must be at least watcher.unbalance.one_x_share_min of the overall r.m.s. ' +
    'on the sensors that carry it (common practice: 1x dominates with unbalance)',
  run({ s, main, measures }) {
    const f = new Finding();
    const share = median(main.flatMap((r) => (r.share === null ? [] : [r.share])));
    measures.one_x_share = share;
    if (share === null) {
      f.limits.push('overall r.m.s. missing: 1x share not checked');
      f.missing += 1;
    } else if (share < s.w.unbalance.one_x_share_min) {
      f.facts.not_one_x = true;
      f.evidence.push(
        `1x is only ${pct(share)} of the overall r.m.s. ` +
          `(${main.map((r) => r.id).join(', ')}): most of the vibration ` +
          `is at other frequencies, so it is not mainly unbalance`,
      );
    } else
      f.evidence.push(
        `1x is ${pct(share)} of the overall r.m.s. ` +
          `(${main.map((r) => r.id).join(', ')}): 1x dominates, as with unbalance`,
      );
    return f.done();
  },
};
