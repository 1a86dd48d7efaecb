import { Finding, mm, type WatcherRule } from './types.js';

/**
 * A 1x too small to judge is no finding: below watcher.unbalance.min_one_x_rms_mm_s (default half
 * the A/B boundary) no unbalance verdict is given.
 */
export const oneXSize: WatcherRule = {
  name: 'one-x-size',
  summary:
    'the largest radial 1x must reach watcher.unbalance.min_one_x_rms_mm_s ' +
    '(default half the A/B boundary) to be judged at all',
  run({ s, radial, maxRadial, measures }) {
    const f = new Finding();
    if (radial.length === 0 || !maxRadial) {
      f.limits.push('no healthy radial sensor with a 1x vector: no unbalance verdict is possible');
      f.facts = { stop: true, confidence_low: true };
      return f.done();
    }
    measures.max_radial_one_x_rms_mm_s = maxRadial.amp;
    if (maxRadial.amp < s.minOneXMmS) {
      f.evidence.push(
        `largest radial 1x is ${mm(maxRadial.amp)} r.m.s. at ${maxRadial.id}, below ` +
          `the ${mm(s.minOneXMmS)} needed to judge unbalance: no significant unbalance`,
      );
      f.facts.stop = true;
    }
    return f.done();
  },
};
