import {
  deg,
  Finding,
  pct,
  relationOf,
  sepDeg,
  type PhasePair,
  type RuleContext,
  type WatcherRule,
} from './types.js';

/**
 * Axial 1x relation between the bearings either side of the coupling (watcher.unbalance.coupling);
 * null without readings at both.
 */
function couplingRelation({ s, pick }: RuleContext): PhasePair | null {
  if (!s.coupling) return null;
  const a = pick(s.coupling.driver, 'axial');
  const b = pick(s.coupling.driven, 'axial');
  if (!a || !b) return null;
  const d = sepDeg(a.phase, b.phase);
  return {
    direction: 'axial',
    phase_diff_deg: d,
    relation: relationOf(d, s.w.unbalance.phase_tolerance_deg),
  };
}

/**
 * Axial 1x (common practice): little on a centre-hung rotor; high and in phase at both bearings on
 * an overhung rotor; high and about 180 deg apart end to end on one shaft -> bent shaft.
 * Misalignment is read from high 2x with the axial 1x about 180 apart across the coupling, which
 * needs an axial sensor on the driver side (watcher.unbalance.coupling); without one, misalignment
 * cannot be told from a bent shaft and the rule says so.
 */
export const axial: WatcherRule = {
  name: 'axial',
  summary:
    'axial 1x at or above axial_ratio_high of the radial 1x: ' +
    'in phase end to end -> overhung pattern, opposed -> bent ' +
    'shaft (or misalignment with high 2x) (common practice)',
  run(ctx) {
    const { s, readings, bearingNames, pairRelation, measures, facts } = ctx;
    const u = s.w.unbalance;
    const f = new Finding();
    const ax = readings.filter((r) => r.direction === 'axial');
    if (ax.length === 0) {
      f.limits.push(
        'no healthy axial sensor: the axial rules (overhung, ' +
          'misalignment, bent shaft) were not checked',
      );
      f.missing += 1;
      return f.done();
    }
    const ratios = bearingNames.flatMap((b) => {
      const x = measures.bearings[b]?.axial_over_radial;
      return x == null ? [] : [{ b, x }];
    });
    const high = ratios.filter((r) => r.x >= u.axial_ratio_high);
    const rel = pairRelation('axial');
    if (rel)
      measures.bearing_pair = {
        bearings: s.bearings!,
        directions: [...(measures.bearing_pair?.directions ?? []), rel],
      };
    if (high.length === 0) {
      const top = ratios.length ? Math.max(...ratios.map((r) => r.x)) : null;
      if (top !== null)
        f.evidence.push(
          `axial 1x is at most ${pct(top)} of the radial 1x: little axial ` +
            `vibration${s.rotor === 'overhung' ? ' (unusual for an overhung rotor)' : ', as on a centre-hung rotor'}`,
        );
      return f.done();
    }
    const list = high.map((r) => `${r.b} ${pct(r.x)}`).join(', ');
    if (rel?.relation === 'opposed') {
      // End to end on one rotor, about 180 apart: a bent shaft (common practice). Misalignment is
      // read across the coupling (high 2x, axial 180 apart between driver and driven bearing),
      // which needs a driver-side sensor.
      const why =
        `axial 1x is high (${list} of radial) and ` + `${deg(rel.phase_diff_deg)} apart end to end`;
      if (!facts.two_x_high) {
        f.point(['bent_shaft'], why);
        f.evidence.push(`${why}: points to a bent shaft`);
      } else {
        const across = couplingRelation(ctx);
        if (across === null) {
          f.point(['bent_shaft', 'misalignment'], `${why}, with high 2x`);
          f.evidence.push(`${why}, with high 2x: a bent shaft or misalignment`);
          f.limits.push(
            s.coupling
              ? `no healthy axial sensor at ${s.coupling.driver} and ${s.coupling.driven}: ` +
                  `misalignment cannot be told from a bent shaft with these sensors`
              : 'no sensor on the driver side of the coupling (watcher.unbalance.coupling): ' +
                  'misalignment cannot be told from a bent shaft with these sensors',
          );
          f.missing += 1;
        } else if (across.relation === 'opposed') {
          f.point(
            ['misalignment'],
            `${why}, with high 2x, and ${deg(across.phase_diff_deg)} apart ` +
              `across the coupling (${s.coupling!.driver}-${s.coupling!.driven})`,
          );
          f.evidence.push(
            `${why}, with high 2x and axial 1x ${deg(across.phase_diff_deg)} apart ` +
              `across the coupling: points to misalignment`,
          );
        } else {
          f.point(
            ['bent_shaft'],
            `${why}; across the coupling the axial 1x are ` +
              `${deg(across.phase_diff_deg)} apart, not opposed`,
          );
          f.evidence.push(
            `${why}, and across the coupling only ${deg(across.phase_diff_deg)} apart: ` +
              `points to a bent shaft (the high 2x is not read as misalignment)`,
          );
        }
      }
    } else if (rel?.relation === 'in_phase') {
      f.facts.overhung_pattern = true;
      f.evidence.push(
        `axial 1x is high (${list} of radial) with both axial readings in ` +
          `phase (${deg(rel.phase_diff_deg)} apart): the overhung-rotor pattern` +
          (s.rotor === 'centre_hung' ? '; machine.rotor says centre_hung, check it' : ''),
      );
    } else if (s.rotor === 'overhung') {
      f.evidence.push(`axial 1x is high (${list} of radial), as expected on an overhung rotor`);
      if (!rel)
        f.limits.push('only one healthy axial sensor: the axial phase relation was not checked');
    } else {
      const why = `axial 1x is high (${list} of radial) on a centre-hung rotor`;
      f.point(['misalignment', 'bent_shaft'], why);
      f.evidence.push(
        rel
          ? `${why}, axial readings ${deg(rel.phase_diff_deg)} apart: ` +
              `points to misalignment or a bent shaft`
          : `${why}: points to misalignment or a bent shaft`,
      );
      if (!rel)
        f.limits.push(
          'only one healthy axial sensor: misalignment and bent shaft cannot be told apart',
        );
    }
    return f.done();
  },
};
