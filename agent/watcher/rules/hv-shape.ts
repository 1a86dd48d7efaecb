import { deg, Finding, relationOf, sepDeg, type WatcherRule } from './types.js';

/**
 * Shape of the motion at each bearing (common practice): unbalance gives circular to elliptical
 * motion, horizontal and vertical 1x about 90 deg apart with an amplitude ratio mostly below
 * about 3. Straight-line motion (near 0 or 180) points to eccentricity, looseness, resonance or
 * weak support.
 */
export const hvShape: WatcherRule = {
  name: 'hv-shape',
  summary:
    'H and V 1x at one bearing about 90 deg apart (+/- phase_tolerance_deg) ' +
    'with H/V ratio up to hv_ratio_max (common practice)',
  run({ s, readings, bearingNames, pick, measures }) {
    const u = s.w.unbalance;
    const tol = u.phase_tolerance_deg;
    const f = new Finding();
    let checked = 0;
    let wanted = 0;
    for (const b of bearingNames) {
      const v = pick(b, 'vertical');
      const hz = pick(b, 'horizontal');
      const a = pick(b, 'axial');
      const radialMax = Math.max(v?.amp ?? 0, hz?.amp ?? 0);
      const entry = {
        hv_amp_ratio: null as number | null,
        hv_phase_diff_deg: null as number | null,
        axial_over_radial: a && radialMax > 0 ? a.amp / radialMax : null,
      };
      measures.bearings[b] = entry;
      if (!v && !hz) continue;
      wanted += 1;
      if (!v || !hz) {
        f.limits.push(
          `${b}: ${v ? 'no healthy horizontal' : 'no healthy vertical'} sensor, ` +
            `the H/V rule was not checked there`,
        );
        continue;
      }
      checked += 1;
      const ratio = Math.max(v.amp, hz.amp) / Math.max(Math.min(v.amp, hz.amp), 1e-9);
      const d = sepDeg(hz.phase, v.phase);
      entry.hv_amp_ratio = ratio;
      entry.hv_phase_diff_deg = d;
      const rel = relationOf(d, tol);
      if (rel !== 'between') {
        const why =
          `${b}: horizontal and vertical 1x are ${deg(d)} apart with H/V ` +
          `ratio ${ratio.toFixed(1)} (straight-line, directional motion)`;
        f.point(['eccentricity', 'looseness', 'resonance', 'weak_support'], why);
        f.evidence.push(
          `${why}: unbalance gives elliptical motion with about 90 deg between H and V`,
        );
      } else if (ratio > u.hv_ratio_max) {
        const why =
          `${b}: H/V 1x ratio ${ratio.toFixed(1)} is above about ` +
          `${u.hv_ratio_max} (the support is much stiffer one way)`;
        f.point(['resonance', 'weak_support'], why);
        f.evidence.push(`${why}: points to resonance or weak support rather than unbalance`);
      } else if (Math.abs(d - 90) <= tol) {
        f.evidence.push(
          `${b}: horizontal and vertical 1x are ${deg(d)} apart with H/V ` +
            `ratio ${ratio.toFixed(1)}: elliptical motion, as with unbalance`,
        );
      } else
        f.evidence.push(
          `${b}: horizontal and vertical 1x are ${deg(d)} apart (H/V ratio ` +
            `${ratio.toFixed(1)}): the motion is neither clearly elliptical nor straight-line`,
        );
    }
    if (checked === 0) f.missing += 2;
    else if (checked < wanted) f.missing += 1;
    void readings;
    return f.done();
  },
};
