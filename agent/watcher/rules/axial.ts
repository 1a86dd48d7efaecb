import { deg, Finding, pct, type WatcherRule } from './types.js';

/**
 * Axial 1x (common practice): little on a centre-hung rotor; high and in phase at both bearings on
 * an overhung rotor; high and about 180 deg apart end to end on one shaft -> bent shaft; high 2x
 * with high axial -> misalignment.
 */
export const axial: WatcherRule = {
  name: 'axial',
  summary: 'axial 1x at or above axial_ratio_high of the radial 1x: in phase end to end -> overhung pattern, opposed -> bent shaft (or misalignment with high 2x) (common practice)',
  run({ s, readings, bearingNames, pairRelation, measures, facts }) {
    const u = s.w.unbalance;
    const f = new Finding();
    const ax = readings.filter((r) => r.direction === 'axial');
    if (ax.length === 0) {
      f.limits.push('no healthy axial sensor: the axial rules (overhung, misalignment, bent shaft) were not checked');
      f.missing += 1;
      return f.done();
    }
    const ratios = bearingNames.flatMap((b) => {
      const x = measures.bearings[b]?.axial_over_radial;
      return x == null ? [] : [{ b, x }];
    });
    const high = ratios.filter((r) => r.x >= u.axial_ratio_high);
    const rel = pairRelation('axial');
    if (rel) measures.bearing_pair = { bearings: s.bearings!, directions: [...(measures.bearing_pair?.directions ?? []), rel] };
    if (high.length === 0) {
      const top = ratios.length ? Math.max(...ratios.map((r) => r.x)) : null;
      if (top !== null) f.evidence.push(`axial 1x is at most ${pct(top)} of the radial 1x: little axial vibration${s.rotor === 'overhung' ? ' (unusual for an overhung rotor)' : ', as on a centre-hung rotor'}`);
      return f.done();
    }
    const list = high.map((r) => `${r.b} ${pct(r.x)}`).join(', ');
    if (rel?.relation === 'opposed') {
      const why = `axial 1x is high (${list} of radial) and ${deg(rel.phase_diff_deg)} apart end to end`;
      if (facts.two_x_high) f.point(['misalignment'], `${why}, with high 2x`);
      else f.point(['bent_shaft'], why);
      f.evidence.push(`${why}: points to ${facts.two_x_high ? 'misalignment (with the high 2x)' : 'a bent shaft'}`);
    } else if (rel?.relation === 'in_phase') {
      f.facts.overhung_pattern = true;
      f.evidence.push(
        `axial 1x is high (${list} of radial) with both axial readings in phase (${deg(rel.phase_diff_deg)} apart): the overhung-rotor pattern` +
          (s.rotor === 'centre_hung' ? '; machine.rotor says centre_hung, check it' : ''),
      );
    } else if (s.rotor === 'overhung') {
      f.evidence.push(`axial 1x is high (${list} of radial), as expected on an overhung rotor`);
      if (!rel) f.limits.push('only one healthy axial sensor: the axial phase relation was not checked');
    } else {
      const why = `axial 1x is high (${list} of radial) on a centre-hung rotor`;
      f.point(['misalignment', 'bent_shaft'], why);
      f.evidence.push(rel ? `${why}, axial readings ${deg(rel.phase_diff_deg)} apart: points to misalignment or a bent shaft` : `${why}: points to misalignment or a bent shaft`);
      if (!rel) f.limits.push('only one healthy axial sensor: misalignment and bent shaft cannot be told apart');
    }
    return f.done();
  },
};
