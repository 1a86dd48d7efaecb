/**
 * Readable text for people: tables of balancing results with units and the angle convention on
 * every one, and the safety cautions. Pure string builders; the CLI prints them.
 */
import { conventionText, type AngleConvention } from './conventions.js';
import type { FourRunResult } from './four-run.js';
import type { MultiSpeedResult } from './multi-speed.js';
import type { BalanceResult, Issue, PlaneWeight } from './job.js';
import { centrifugalForceN, type SplitPart } from './weights.js';

/**
 * Columns padded to their widest cell; numbers right-aligned (cells starting with a digit or -).
 */
export function table(
  header: readonly string[],
  rows: readonly (readonly string[])[],
  indent = '  ',
): string {
  const all = [header, ...rows];
  const widths = header.map((_, c) => Math.max(...all.map((r) => (r[c] ?? '').length)));
  const numeric = header.map(
    (_, c) => rows.length > 0 && rows.every((r) => /^[-+0-9]/.test(r[c] ?? '')),
  );
  return all
    .map(
      (r) =>
        indent +
        r
          .map((cell, c) => (numeric[c] ? cell.padStart(widths[c]!) : cell.padEnd(widths[c]!)))
          .join('  ')
          .trimEnd(),
    )
    .join('\n');
}

export function fixed(x: number, digits: number): string {
  return x.toFixed(digits);
}

/** Safety cautions shown with every balancing result meant for people. */
export function balancingCautions(): string[] {
  const example = centrifugalForceN(50, 600, 1480);
  return [
    'Lock out and tag out the fan before anyone touches the rotor, and prove it cannot turn.',
    `Every weight pulls outward with F = m r omega^2 at speed (50 g at 600 mm ` +
      `at 1480 r/min: about ${fixed(example, 0)} N). Weld or bolt weights only as ` +
      `the fan maker allows; check trial weights are secure before every start.`,
    'Nobody stands in line with the impeller (in its ' +
      'plane of rotation) at start-up or during the runs.',
    'Watch the vibration during every trial and check run, and stop ' +
      "the fan at once if it climbs into zone D or to the plant's trip " +
      'level: a trial weight in the wrong place can double the vibration.',
    'A draft fan can turn from the draft of other fans on the same duct or stack: block ' +
      'the rotor against turning and close and isolate the dampers before anyone reaches in.',
    'Reaching the impeller may be confined-space entry, with hot gas, ' +
      "dust or too little oxygen in the casing: it needs the plant's " +
      'permit (gas test, standby, rescue plan) before anyone goes in.',
    'Fitting sensors or the reference mark is work on the ' +
      'machine: do it under the same lock-out as fitting weights.',
    'These figures support, and do not replace, a competent ' +
      "balancing technician: follow the fan maker's instructions, " +
      "the plant's procedures, local codes and licensed practice.",
  ];
}

export function cautionBlock(): string {
  return (
    'SAFETY\n' +
    balancingCautions()
      .map((c) => `  ! ${c}`)
      .join('\n') +
    '\n'
  );
}

export function conventionLine(convention: AngleConvention): string {
  return `Angles: ${conventionText(convention)}.`;
}

function issueLines(title: string, issues: readonly Issue[]): string {
  if (!issues.length) return '';
  return `${title}\n` + issues.map((i) => `  - ${i.message}\n    -> ${i.hint}`).join('\n') + '\n';
}

function weightRows(ws: readonly PlaneWeight[]): string[][] {
  return ws.map((w) => [
    w.plane,
    fixed(w.mass_g, 1),
    fixed(w.angle_deg, 1),
    w.unbalance_g_mm !== undefined ? fixed(w.unbalance_g_mm, 0) : '-',
    w.force_n !== undefined ? fixed(w.force_n, 0) : '-',
    w.over_max ? 'OVER max_mass_g' : '',
  ]);
}

const WEIGHT_HEADER = ['plane', 'mass g', 'angle deg', 'unbalance g mm', 'force N', ''];

export function formatSolveReport(r: BalanceResult): string {
  const unit = r.amp_unit ?? 'job unit';
  const out: string[] = [];
  out.push(
    `Balancing job: ${r.planes.length} plane(s) (${r.planes.join(', ')}), ` +
      `${r.sensors.length} sensor(s) (${r.sensors.join(', ')})` +
      (r.speed_rpm !== null ? `, ${fixed(r.speed_rpm, 0)} r/min` : '') +
      (r.method === 'given_coefficients' ? ', trim run from given influence coefficients' : ''),
  );
  out.push(conventionLine(r.angle_convention));
  out.push(`Amplitudes: ${unit}.\n`);
  if (!r.ok) {
    out.push('NO CORRECTION GIVEN: the job cannot be solved honestly as it stands.');
    out.push(issueLines('Problems:', r.problems));
  } else {
    out.push('Corrections to add, relative to the rotor as found, with ALL trial weights removed:');
    out.push(table(WEIGHT_HEADER, weightRows(r.corrections)));
    out.push('\nOr, leaving the weights of the last run on the rotor, add:');
    out.push(table(WEIGHT_HEADER, weightRows(r.corrections_trials_left_in)));
    if (r.static_couple) {
      const sc = r.static_couple;
      out.push(
        `\nThe same correction as static and couple pairs: static ` +
          `${fixed(sc.static_pair.mass_g_each, 1)} g in each plane ` +
          `at ${fixed(sc.static_pair.angle_deg, 1)} deg; ` +
          `couple ${fixed(sc.couple_pair.mass_g_each, 1)} g in each plane, ` +
          `${r.planes[0]} at ${fixed(sc.couple_pair.angle_deg_first_plane, 1)} deg and ` +
          `${r.planes[1]} at ${fixed(sc.couple_pair.angle_deg_second_plane, 1)} deg.`,
      );
    }
    out.push('');
  }
  if (r.influence_coefficients.length) {
    out.push(
      `Influence coefficients (1x vector a 1 g weight on the reference mark adds, ${unit} per g):`,
    );
    out.push(
      table(
        ['sensor', 'plane', `amp per g`, 'phase deg'],
        r.influence_coefficients.map((c) => [
          c.sensor,
          c.plane,
          c.amp_per_g.toPrecision(4),
          fixed(c.phase_deg, 1),
        ]),
      ),
    );
    out.push('');
  }
  const pred = new Map(r.predicted_residuals.map((v) => [v.sensor, v]));
  out.push(`1x vectors (${unit}):`);
  out.push(
    table(
      ['sensor', 'as found', 'phase deg', 'predicted after correction', 'phase deg'],
      r.as_found.map((v) => {
        const p = pred.get(v.sensor);
        const shown = p && p.amp > 0;
        return [
          v.sensor,
          v.amp.toPrecision(3),
          fixed(v.phase_deg, 1),
          p ? (shown ? p.amp.toPrecision(3) : '0') : '-',
          shown ? fixed(p.phase_deg, 1) : '-',
        ];
      }),
    ),
  );
  if (r.trial_checks.length) {
    out.push(
      '\nRuns with weights against as found (#n = runs[n]; enough: ' +
        '30 % in amplitude or 30 deg in phase, common practice):',
    );
    out.push(
      table(
        ['run', 'sensor', 'amp change %', 'phase change deg', 'vector change %', 'enough'],
        r.trial_checks.map((c) => [
          `#${c.run}` + (c.label ? ` ${c.label}` : ''),
          c.sensor,
          fixed(c.amp_change_pct, 1),
          fixed(c.phase_change_deg, 1),
          fixed(c.vector_change_pct, 1),
          c.moved_enough ? 'yes' : 'no',
        ]),
      ),
    );
  }
  const conds: string[] = [];
  if (r.condition_number !== null && Number.isFinite(r.condition_number))
    conds.push(`influence matrix ${fixed(r.condition_number, 2)}`);
  if (r.trial_condition_number !== null && Number.isFinite(r.trial_condition_number))
    conds.push(`trial-weight matrix ${fixed(r.trial_condition_number, 2)}`);
  if (conds.length)
    out.push(
      `\nCondition numbers: ${conds.join(', ')} (1 is ` +
        `ideal; above 10 reading errors are amplified).`,
    );
  if (r.unbalance) {
    const u = r.unbalance;
    out.push('\nUnbalance estimated from the vibration through the influence coefficients (g mm):');
    out.push(
      table(
        ['plane', 'as found', 'at last run'],
        r.planes.map((p) => [p, fixed(u.as_found_g_mm[p]!, 0), fixed(u.last_run_g_mm[p]!, 0)]),
      ),
    );
    if (u.permissible_g_mm !== null && u.allocation) {
      const a = u.allocation;
      out.push(
        `  ISO 21940-11 permissible residual unbalance ` +
          `${fixed(u.permissible_g_mm, 0)} g mm for the rotor; per plane ` +
          r.planes.map((p) => `${p} ${fixed(a.by_plane_g_mm[p]!, 0)}`).join(', ') +
          ` g mm: last run ${u.last_run_within_grade ? 'WITHIN' : 'NOT within'} the grade.`,
      );
      out.push(`  allocation: ${a.basis}`);
    }
  }
  out.push('');
  out.push(issueLines('Warnings:', r.warnings));
  return out.filter((l, i, a) => !(l === '' && a[i - 1] === '')).join('\n');
}

export function formatSplitReport(
  s: {
    angle_convention: AngleConvention;
    mass_g: number;
    angle_deg: number;
    moved_mass_g: number;
    radius_mm: number | null;
    positions_radius_mm: number | null;
    weights: readonly SplitPart[];
  },
  numbering = 'Positions are numbered from 0 at first_deg, ' +
    'counting in the direction the angles are measured.',
): string {
  const out: string[] = [];
  out.push(conventionLine(s.angle_convention));
  out.push(numbering);
  out.push(
    `Weight: ${fixed(s.mass_g, 1)} g at ${fixed(s.angle_deg, 1)} deg` +
      (s.radius_mm !== null ? `, radius ${fixed(s.radius_mm, 1)} mm` : ''),
  );
  if (
    s.radius_mm !== null &&
    s.positions_radius_mm !== null &&
    s.radius_mm !== s.positions_radius_mm
  ) {
    out.push(
      `Moved to the positions' radius ${fixed(s.positions_radius_mm, 1)} ` +
        `mm: ${fixed(s.moved_mass_g, 2)} g (mass x ` +
        `${fixed(s.radius_mm, 1)} / ${fixed(s.positions_radius_mm, 1)}).`,
    );
  }
  out.push('Fit:');
  out.push(
    table(
      ['position', 'angle deg', 'mass g'],
      s.weights.map((w) => [String(w.position), fixed(w.angle_deg, 1), fixed(w.mass_g, 2)]),
    ),
  );
  return out.join('\n') + '\n';
}

export function formatFourRunReport(r: FourRunResult): string {
  const unit = r.amp_unit ?? 'job unit';
  const out: string[] = [];
  out.push(
    `Amplitude-only balancing (four-run method: as found, trial weight ` +
      `at ${r.fit_residual?.trials.length ?? 'three'} positions), one plane` +
      (r.sensor ? `, sensor ${r.sensor}` : ''),
  );
  out.push(conventionLine(r.angle_convention));
  out.push(
    `The method uses amplitudes only (no phase); the correction ` +
      `angle is counted like the trial angles. Amplitudes: ${unit}.\n`,
  );
  if (!r.ok || !r.correction) {
    out.push('NO CORRECTION GIVEN: the readings do not fix the weight honestly.');
    out.push(issueLines('Problems:', r.problems));
    out.push(issueLines('Warnings:', r.warnings));
    return out.filter((l, i, a) => !(l === '' && a[i - 1] === '')).join('\n');
  }
  const c = r.correction;
  const u = r.correction_uncertainty!;
  out.push('Correction to fit, with the trial weight REMOVED (relative to the rotor as found):');
  out.push(
    table(
      ['mass g', '+/- g', 'angle deg', '+/- deg', 'unbalance g mm', 'force N'],
      [
        [
          fixed(c.mass_g, 1),
          fixed(u.mass_g, 1),
          fixed(c.angle_deg, 1),
          fixed(u.angle_deg, 1),
          c.unbalance_g_mm !== undefined ? fixed(c.unbalance_g_mm, 0) : '-',
          c.force_n !== undefined ? fixed(c.force_n, 0) : '-',
        ],
      ],
    ),
  );
  out.push(
    `  (+/- is one standard deviation at a reading ` +
      `scatter of ${u.scatter_amp.toPrecision(3)} ${unit})`,
  );
  const t = r.trial_effect!;
  out.push(
    `\nTrial effect: ${t.amp.toPrecision(3)} ${unit} for ` +
      `${fixed(r.trial_mass_g, 1)} g (${t.amp_per_g.toPrecision(3)} per g), ` +
      `${fixed(t.pct_of_as_found, 0)} % of the as-found ${r.as_found.toPrecision(3)}.`,
  );
  const f = r.fit_residual!;
  out.push(
    `Circles: as-found circle radius ${r.as_found.toPrecision(3)}, trial circles round ` +
      `the trial positions; least-squares meeting point at radius ` +
      `${r.intersection!.radius.toPrecision(3)}, ${fixed(r.intersection!.angle_deg, 1)} deg.`,
  );
  out.push(
    table(
      ['trial at deg', 'measured', 'fitted'],
      f.trials.map((x) => [
        fixed(x.angle_deg, 1),
        x.measured_amp.toPrecision(3),
        x.fitted_amp.toPrecision(3),
      ]),
    ),
  );
  out.push(
    `  fit residual ${f.rms_amp.toPrecision(3)} ${unit} r.m.s. ` +
      `(${fixed(f.pct_of_as_found, 1)} % of as found)`,
  );
  out.push(
    '\nFit the correction, remove the trial weight, and do a check run: the 1x should ' +
      'drop well below as found; a second round of the method trims what is left.',
  );
  out.push('');
  out.push(issueLines('Warnings:', r.warnings));
  return out.filter((l, i, a) => !(l === '' && a[i - 1] === '')).join('\n');
}

export function formatMultiSpeedReport(r: MultiSpeedResult): string {
  const unit = r.amp_unit ?? 'job unit';
  const out: string[] = [];
  out.push(
    `Multi-speed balancing: ${r.speeds.length} speeds ` +
      `(${r.speeds.map((s) => fixed(s.speed_rpm, 0)).join(', ')} r/min), ` +
      `${r.planes.length} plane(s) (${r.planes.join(', ')}), ` +
      `${r.sensors.length} sensor(s) (${r.sensors.join(', ')})`,
  );
  out.push(conventionLine(r.angle_convention));
  out.push(
    `One correction minimising the weighted least squares of ` +
      `the 1x over all speeds and sensors. Amplitudes: ${unit}.\n`,
  );
  if (!r.ok) {
    out.push('NO CORRECTION GIVEN:');
    out.push(issueLines('Problems:', r.problems));
  } else {
    out.push(
      'Correction to add, relative to the rotor as found, with ' +
        'ALL trial weights removed (force at the highest speed):',
    );
    out.push(table(WEIGHT_HEADER, weightRows(r.corrections)));
    out.push('');
  }
  const shown = r.speeds.some((s) => s.residual_share !== null);
  out.push(
    `Per speed (${unit}; "left" = r.m.s. over the sensors of predicted / as ` +
      `found${r.ok ? '' : ', for the compromise that was refused'}):`,
  );
  out.push(
    table(
      [
        'speed r/min',
        'weight',
        ...r.sensors.map((s) => `${s} as found`),
        ...(shown ? r.sensors.map((s) => `${s} predicted`) : []),
        ...(shown ? ['left %'] : []),
        'own correction',
      ],
      r.speeds.map((s) => [
        fixed(s.speed_rpm, 0),
        fixed(s.weight, 2),
        ...s.as_found.map((v) => `${v.amp.toPrecision(3)} @ ${fixed(v.phase_deg, 0)}`),
        ...(shown
          ? s.predicted_residuals.map((v) => `${v.amp.toPrecision(3)} @ ${fixed(v.phase_deg, 0)}`)
          : []),
        ...(shown ? [s.residual_share === null ? '-' : fixed(s.residual_share * 100, 0)] : []),
        s.own_corrections.length
          ? s.own_corrections
              .map((w) => `${w.plane} ${fixed(w.mass_g, 1)} g @ ${fixed(w.angle_deg, 0)}`)
              .join(', ')
          : '-',
      ]),
    ),
  );
  if (r.condition_number !== null && Number.isFinite(r.condition_number))
    out.push(
      `\nCondition number of the stacked influence matrix: ` +
        `${fixed(r.condition_number, 2)} (1 is ideal).`,
    );
  out.push('');
  out.push(
    issueLines('Warnings:', [
      ...r.warnings,
      ...r.speeds.flatMap((s) =>
        s.warnings.map((w) => ({ ...w, message: `${fixed(s.speed_rpm, 0)} r/min: ${w.message}` })),
      ),
    ]),
  );
  return out.filter((l, i, a) => !(l === '' && a[i - 1] === '')).join('\n');
}
