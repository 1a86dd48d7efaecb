// @ts-check
/**
 * Job records and the printable report of one job (print to PDF from the browser: the print style
 * sheet drops the bar, buttons and tools). The report holds every run's vectors and weights, the
 * conventions, the results, and who did what when.
 */
import { api, deg, errorBox, fill, h, num, units, vel, when } from './format.js';
import { weightText } from './workbench.js';

/** @param {HTMLElement} root */
export async function showRecords(root) {
  fill(root, h('h1', null, 'Job records'), h('p', null, 'Loading...'));
  try {
    const r = await api.get('/api/jobs');
    fill(
      root,
      h('h1', null, 'Job records'),
      r.jobs.length
        ? h(
            'div',
            { class: 'scroll' },
            h(
              'table',
              { id: 'records' },
              h(
                'tr',
                null,
                h('th', null, 'job'),
                h('th', null, 'kind'),
                h('th', null, 'status'),
                h('th', null, 'started'),
                h('th', null, 'by'),
                h('th', null, ''),
              ),
              r.jobs.map((/** @type {any} */ j) =>
                h(
                  'tr',
                  { dataset: { job: j.job_id } },
                  h('td', null, j.job_id),
                  h('td', null, j.kind ?? '-'),
                  h('td', null, j.status),
                  h('td', null, when(j.created_at ?? j.saved_at)),
                  h('td', null, j.created_by ?? '-'),
                  h(
                    'td',
                    null,
                    j.kind
                      ? h('a', { href: `#report/${encodeURIComponent(j.job_id)}` }, 'report')
                      : null,
                    ' ',
                    h('button', { onclick: () => void exportJob(j.job_id) }, 'export JSON'),
                  ),
                ),
              ),
            ),
          )
        : h('p', null, 'No balancing job has been recorded yet.'),
    );
  } catch (e) {
    fill(root, h('h1', null, 'Job records'), errorBox(e));
  }
}

/**
 * Downloads the job record (needs the token, so through fetch and a blob).
 * @param {string} jobId
 */
async function exportJob(jobId) {
  const rec = await api.get(`/api/jobs/${encodeURIComponent(jobId)}/export`);
  const url = URL.createObjectURL(
    new Blob([JSON.stringify(rec, null, 2)], { type: 'application/json' }),
  );
  const a = h('a', { href: url, download: `${jobId}.json` });
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10000);
}

/** @param {HTMLElement} root @param {string} jobId @param {any} session */
export async function showReport(root, jobId, session) {
  fill(root, h('p', null, 'Loading the report...'));
  let v;
  try {
    v = (await api.get(`/api/jobs/${encodeURIComponent(jobId)}`)).view;
  } catch (e) {
    fill(root, errorBox(e));
    return;
  }
  const j = v.job;
  const s = j.setup;
  const sensors = s.sensors;
  const sol = j.solution;
  const r = sol?.result;
  const conv = s.angle_convention === 'against_rotation' ? 'against rotation' : 'with rotation';
  fill(
    root,
    h(
      'article',
      { class: 'report', id: 'report' },
      h(
        'div',
        { class: 'buttons no-print' },
        h('button', { class: 'primary', onclick: () => window.print() }, 'Print / save as PDF'),
        h('a', { href: '#records' }, 'back to the records'),
      ),
      h('h1', null, `Balancing report: ${session.machine_name}`),
      h(
        'table',
        null,
        h('tr', null, h('th', null, 'asset'), h('td', null, j.asset)),
        h('tr', null, h('th', null, 'job'), h('td', null, j.job_id)),
        h('tr', null, h('th', null, 'kind'), h('td', null, s.kind.replace('_', '-'))),
        h(
          'tr',
          null,
          h('th', null, 'status'),
          h(
            'td',
            null,
            `${j.status}${j.closed ? ` ${when(j.closed.at)} by ${j.closed.by.name}${j.closed.note ? `: ${j.closed.note}` : ''}` : ''}`,
          ),
        ),
        h(
          'tr',
          null,
          h('th', null, 'started'),
          h(
            'td',
            null,
            `${when(j.created_at)} by ${j.created_by.name} (token ${j.created_by.token})`,
          ),
        ),
        h(
          'tr',
          null,
          h('th', null, 'planes'),
          h(
            'td',
            null,
            s.planes
              .map(
                (/** @type {any} */ p) =>
                  `${p.name}: radius ${num(p.radius_mm, 0)} ` +
                  `mm${p.max_mass_g ? `, at most ${num(p.max_mass_g, 0)} g` : ''}${p.positions ? `, ${p.positions.count} positions from ${deg(p.positions.first_deg)}` : ''}`,
              )
              .join('; '),
          ),
        ),
        h(
          'tr',
          null,
          h('th', null, 'rotor'),
          h(
            'td',
            null,
            `${s.rotor_mass_kg === null ? 'mass not given' : `${num(s.rotor_mass_kg, 0)} kg`} ` +
              `on ${s.bearings} bearings; grade ` +
              `${s.grade_mm_s === null ? 'not given' : `G${s.grade_mm_s}`}`,
          ),
        ),
        s.coefficients_from
          ? h(
              'tr',
              null,
              h('th', null, 'coefficients'),
              h(
                'td',
                null,
                `stored from job ${s.coefficients_from.job_id} ` +
                  `(${when(s.coefficients_from.saved_at)}, ` +
                  `${num(s.coefficients_from.speed_rpm, 0)} r/min)`,
              ),
            )
          : null,
        s.notes ? h('tr', null, h('th', null, 'notes'), h('td', null, s.notes)) : null,
      ),
      h(
        'div',
        { class: 'conv-banner' },
        `Conventions: ${v.convention}. Amplitudes: 1x velocity, ${units.velocity} peak.`,
      ),
      h('h2', null, 'Runs'),
      j.runs.map((/** @type {any} */ run) =>
        h(
          'section',
          { class: 'report-run' },
          h(
            'h3',
            null,
            `Run ${run.index}: ` +
              `${run.label}${run.discarded ? ` (left out: ${run.discarded.reason})` : ''}`,
          ),
          h(
            'p',
            null,
            `Declared ${when(run.declared_at)} by ` +
              `${run.declared_by.name}${run.cautions_acknowledged ? ', safety cautions acknowledged' : ''}. ` +
              `Weights on the rotor: ` +
              `${run.weights.length ? run.weights.map(weightText).join('; ') : 'none (as found)'}.`,
          ),
          run.changes.length
            ? h(
                'p',
                null,
                `Changes: ` +
                  `${run.changes.map((/** @type {any} */ c) => `${c.action} ${c.weight.id}${c.force_n !== null ? ` (${num(c.force_n, 0)} N)` : ''}`).join(', ')}.`,
              )
            : null,
          run.capture
            ? [
                h(
                  'p',
                  null,
                  `Captured ${when(run.capture.at)} by ${run.capture.by.name}: ` +
                    `${num(run.capture.speed_rpm, 1)} r/min ` +
                    `(${num(run.capture.speed_min_rpm, 1)}-${num(run.capture.speed_max_rpm, 1)}), ` +
                    `${num(run.capture.revolutions, 0)} revolutions averaged, ` +
                    `${run.capture.restarts} restart(s).`,
                ),
                h(
                  'table',
                  null,
                  h(
                    'tr',
                    null,
                    h('th', null, 'sensor'),
                    h('th', null, `1x ${units.velocity} pk`),
                    h('th', null, 'phase (lag)'),
                    h('th', null, 'scatter %'),
                  ),
                  sensors.map((/** @type {string} */ id) => {
                    const x = run.capture.readings[id];
                    return h(
                      'tr',
                      null,
                      h('td', null, id),
                      h('td', { class: 'n' }, vel(x?.amp_pk_mm_s)),
                      h('td', { class: 'n' }, deg(x?.phase_deg)),
                      h('td', { class: 'n' }, num(x?.scatter_pct, 1)),
                    );
                  }),
                ),
                run.capture.notes.map((/** @type {string} */ n) =>
                  h('p', { class: 'msg msg-warn' }, n),
                ),
              ]
            : h('p', null, 'Not measured.'),
          run.trial_check
            ? h(
                'p',
                null,
                `Trial check (30 % or 30\u00b0, common practice): ` +
                  `${run.trial_check.map((/** @type {any} */ t) => `${t.sensor} ${num(t.amp_change_pct, 0)} % / ${num(t.phase_change_deg, 0)}\u00b0 ${t.moved_enough ? 'enough' : 'not enough'}`).join('; ')}.`,
              )
            : null,
          run.residual
            ? h(
                'p',
                null,
                `Residual: ` +
                  `${run.residual.sensors.map((/** @type {any} */ x) => `${x.sensor} ${num(x.pct_of_as_found, 1)} % of as found`).join('; ')}.`,
                run.residual.unbalance_g_mm
                  ? ` Residual unbalance ${Object.entries(run.residual.unbalance_g_mm)
                      .map(([p, u]) => `${p} ${num(/** @type {number} */ (u), 0)} g mm`)
                      .join(', ')}.`
                  : '',
                run.residual.permissible_per_plane_g_mm !== null
                  ? ` ISO 21940-11 G${s.grade_mm_s}: ` +
                      `${num(run.residual.permissible_per_plane_g_mm, 0)} g mm per plane: ` +
                      `${run.residual.within_grade ? 'WITHIN' : 'NOT within'} the grade.`
                  : '',
              )
            : null,
        ),
      ),
      h('h2', null, 'Result'),
      r
        ? [
            h(
              'p',
              null,
              `Solved ${when(sol.at)} by ${sol.by.name} from ` +
                `${r.method === 'given_coefficients' ? 'the stored influence coefficients' : 'the trial runs'} ` +
                `at ${num(r.speed_rpm, 0)} r/min.`,
            ),
            r.ok
              ? h(
                  'table',
                  null,
                  h(
                    'tr',
                    null,
                    h('th', null, 'plane'),
                    h('th', null, 'correction g'),
                    h('th', null, `angle (${conv})`),
                    h('th', null, 'force N'),
                    h('th', null, 'or, trial weights left on: g'),
                    h('th', null, 'angle'),
                  ),
                  r.corrections.map((/** @type {any} */ c, /** @type {number} */ i) => {
                    const l = r.corrections_trials_left_in[i];
                    return h(
                      'tr',
                      null,
                      h('td', null, c.plane),
                      h('td', { class: 'n' }, num(c.mass_g, 1)),
                      h('td', { class: 'n' }, deg(c.angle_deg)),
                      h('td', { class: 'n' }, num(c.force_n, 0)),
                      h('td', { class: 'n' }, num(l?.mass_g, 1)),
                      h('td', { class: 'n' }, deg(l?.angle_deg)),
                    );
                  }),
                )
              : r.problems.map((/** @type {any} */ p) =>
                  h('p', { class: 'msg msg-error' }, p.message, ' \u2192 ', p.hint),
                ),
            r.influence_coefficients.length
              ? h(
                  'table',
                  null,
                  h(
                    'tr',
                    null,
                    h('th', null, 'sensor'),
                    h('th', null, 'plane'),
                    h('th', null, `${units.velocity} pk per g`),
                    h('th', null, 'phase'),
                  ),
                  r.influence_coefficients.map((/** @type {any} */ c) =>
                    h(
                      'tr',
                      null,
                      h('td', null, c.sensor),
                      h('td', null, c.plane),
                      h(
                        'td',
                        { class: 'n' },
                        units.velocity === 'in/s'
                          ? (c.amp_per_g / 25.4).toPrecision(3)
                          : c.amp_per_g.toPrecision(3),
                      ),
                      h('td', { class: 'n' }, deg(c.phase_deg)),
                    ),
                  ),
                )
              : null,
            r.condition_number !== null
              ? h('p', null, `Condition number ${num(r.condition_number, 2)}.`)
              : null,
            r.warnings.map((/** @type {any} */ w) =>
              h('p', { class: 'msg msg-warn' }, w.message, ' \u2192 ', w.hint),
            ),
          ]
        : h('p', null, 'Not solved.'),
      j.coefficients
        ? h(
            'p',
            null,
            j.coefficients.saved
              ? "Influence coefficients kept for the watcher's " +
                  'balance forecast and later trim runs.'
              : `Influence coefficients not kept: ${j.coefficients.reason}.`,
          )
        : null,
      h('h2', null, 'Weights left on the rotor'),
      h(
        'p',
        null,
        v.weights_on_rotor.length ? v.weights_on_rotor.map(weightText).join('; ') : 'none',
      ),
      h('h2', null, 'Record of actions'),
      h(
        'table',
        null,
        h('tr', null, h('th', null, 'when'), h('th', null, 'who'), h('th', null, 'what')),
        j.log.map((/** @type {any} */ e) =>
          h(
            'tr',
            null,
            h('td', null, when(e.at)),
            h('td', null, `${e.by.name} (${e.by.token})`),
            h('td', null, e.detail),
          ),
        ),
      ),
      h(
        'div',
        { class: 'cautions' },
        h('h3', null, 'Safety'),
        h(
          'ul',
          null,
          v.cautions.map((/** @type {string} */ c) => h('li', null, c)),
        ),
      ),
      h('p', { class: 'print-only' }, `Printed ${when(new Date().toISOString())}.`),
    ),
  );
}
