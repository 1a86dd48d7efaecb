// @ts-check
/**
 * The balancing workbench on the page. The server keeps the job and checks every step; this module
 * shows the job (runs, vectors, weights, solution, residual) and the form for the next step. Parts
 * that change while a run is being captured are redrawn on every update; the form for the next step
 * is rebuilt only when the step changes, so nothing typed into it is lost.
 */
import { api, append, deg, errorBox, fill, forceN, h, num, units, vel, when } from './format.js';

// The server's own types: the page is checked against what agent/balance/workbench/view.ts sends.
/** @typedef {import('../../balance/workbench/view.js').JobView} JobView */
/** @typedef {import('../../balance/workbench/records.js').WorkbenchRun} WorkbenchRun */
/** @typedef {import('../../balance/workbench/records.js').FittedWeight} FittedWeight */
/** @typedef {import('../../balance/workbench/records.js').ProposedChange} ProposedChange */
/** @typedef {import('../../balance/job.js').PlaneWeight} PlaneWeight */
/** @typedef {import('../view.js').SessionView} SessionView */
/** @typedef {import('../view.js').LiveSnapshot} LiveSnapshot */

const KIND_TEXT = {
  single_plane: 'single-plane',
  two_plane: 'two-plane',
  static_couple: 'static-couple (two planes)',
  trim: 'trim run from stored coefficients',
};

/** @param {string} id @param {HTMLElement} form */
function val(form, id) {
  const el = /** @type {HTMLInputElement | null} */ (form.querySelector(`[name="${id}"]`));
  return el ? el.value.trim() : '';
}
/** @param {HTMLElement} form @param {string} id */
function numVal(form, id) {
  const t = val(form, id);
  return t === '' ? undefined : Number(t);
}
/**
 * @param {string} name
 * @param {string} label
 * @param {any} value
 * @param {Record<string, any>} [extra]
 */
function field(name, label, value, extra = {}) {
  return h(
    'div',
    null,
    h('label', { for: `f-${name}` }, label),
    h('input', { id: `f-${name}`, name, value: value ?? '', ...extra }),
  );
}
/**
 * @param {string} name
 * @param {string} label
 * @param {any} value
 * @param {string} unit
 * @param {Record<string, any>} [extra]
 */
function numField(name, label, value, unit, extra = {}) {
  return h(
    'div',
    null,
    h('label', { for: `f-${name}` }, `${label} (${unit})`),
    h('input', {
      id: `f-${name}`,
      name,
      type: 'number',
      step: 'any',
      inputmode: 'decimal',
      value: value ?? '',
      ...extra,
    }),
  );
}

export class Workbench {
  /**
   * @param {HTMLElement} root
   * @param {SessionView} session
   * @param {() => LiveSnapshot | null} getLive
   */
  constructor(root, session, getLive) {
    this.root = root;
    this.session = session;
    this.getLive = getLive;
    /** @type {JobView | null} */
    this.view = null;
    /** @type {JobView | null} */
    this.closed = null;
    this.formKey = '';
    this.status = h('div');
    this.form = h('div', { class: 'no-print' });
    this.details = h('div');
    this.message = h('div', { 'aria-live': 'polite' });
    this.tools = this.buildTools();
    root.append(this.status, this.message, this.form, this.details, this.tools);
  }

  show() {
    this.render();
  }

  /** @param {JobView | null} view */
  update(view) {
    if (!view && this.view && this.view.job.status === 'open') {
      // The open job was closed (here or elsewhere): keep showing it, read only.
      void api.get(`/api/jobs/${encodeURIComponent(this.view.job.job_id)}`).then((r) => {
        this.closed = r.view;
        this.render();
      });
    }
    this.view = view;
    if (view) this.closed = null;
    this.render();
  }

  get mayAct() {
    return !!this.session.may_act;
  }

  render() {
    const v = this.view ?? this.closed;
    if (!v) {
      fill(this.status, h('h1', null, 'Balancing'), h('p', null, 'No balancing job is open.'));
      fill(this.details);
      this.setForm('start', () =>
        this.mayAct
          ? this.startForm()
          : h(
              'p',
              { class: 'msg msg-warn' },
              'Your token is a viewer token: an operator token is needed to run a balancing job.',
            ),
      );
      return;
    }
    fill(this.status, this.statusBlock(v));
    fill(this.details, v.job.solution ? this.solutionBlock(v) : null, this.runsBlock(v));
    const j = v.job;
    const last = j.runs[j.runs.length - 1];
    const key = [
      j.job_id,
      j.status,
      v.step,
      j.runs.length,
      last?.capture?.at ?? '',
      j.solution?.at ?? '',
      last?.discarded ? 'd' : '',
    ].join('|');
    this.setForm(key, () => this.stepForm(v));
  }

  /** @param {string} key @param {() => any} build */
  setForm(key, build) {
    if (key === this.formKey) return;
    // A message about the previous step is out of date once the step changes.
    if (
      this.formKey &&
      key.split('|').slice(0, 3).join('|') !== this.formKey.split('|').slice(0, 3).join('|')
    )
      fill(this.message);
    this.formKey = key;
    fill(this.form, build());
  }

  /** @param {string} path @param {any} body @param {string} done */
  async act(path, body, done) {
    fill(this.message);
    try {
      const r = await api.post(path, body);
      if ('view' in (r ?? {})) {
        if (r.view?.job.status !== 'open') this.closed = r.view;
        this.view = r.view?.job.status === 'open' ? r.view : null;
        this.formKey = '';
        this.render();
      }
      if (done) fill(this.message, h('div', { class: 'msg msg-ok', role: 'status' }, done));
      return r;
    } catch (e) {
      fill(this.message, errorBox(e));
      this.message.scrollIntoView({ block: 'center' });
      return null;
    }
  }

  // ---- status (redrawn on every update) ----

  /** @param {JobView} v */
  statusBlock(v) {
    const j = v.job;
    const s = j.setup;
    const trials = {
      single_plane: ['trial'],
      two_plane: ['trial 1', 'trial 2'],
      static_couple: ['static pair', 'couple pair'],
      trim: [],
    }[/** @type {'trim'} */ (s.kind)];
    const steps = ['as found', ...trials, 'solve', 'correction fitted', 'check run'];
    const doneCount = (() => {
      const measured = j.runs.filter((r) => r.capture && !r.discarded);
      const nTrials = measured.filter((r) => r.purpose === 'trial').length;
      let n = measured.some((r) => r.purpose === 'as_found') ? 1 : 0;
      n += Math.min(nTrials, trials.length);
      if (j.solution?.result.ok) n = 1 + trials.length + 1;
      if (j.runs.some((r) => r.purpose === 'check')) n = 2 + trials.length + 1;
      if (j.runs.some((r) => r.purpose === 'check' && r.capture)) n = steps.length;
      return n;
    })();
    return h(
      'div',
      null,
      h('h1', null, `Balancing job: ${KIND_TEXT[/** @type {'trim'} */ (s.kind)]}`),
      h(
        'div',
        { class: 'conv-banner', dataset: { convention: s.angle_convention } },
        `Conventions: ${v.convention}.`,
      ),
      h(
        'p',
        null,
        `Job ${j.job_id}, started ${when(j.created_at)} by ${j.created_by.name}. Planes: ` +
          `${s.planes.map((p) => `${p.name} (radius ${num(p.radius_mm, 0)} mm)`).join(', ')}. ` +
          `Sensors: ${s.sensors.join(', ')}.`,
      ),
      j.status !== 'open'
        ? h(
            'div',
            { class: 'msg msg-ok' },
            `This job is ${j.status} (${when(j.closed?.at)}, ` +
              `${j.closed?.by.name}${j.closed?.note ? `: ${j.closed.note}` : ''}).`,
            ' ',
            h('a', { href: `#report/${encodeURIComponent(j.job_id)}` }, 'Open the report'),
          )
        : h(
            'ol',
            { class: 'steps' },
            steps.map((t, i) =>
              h('li', { class: i < doneCount ? 'done' : i === doneCount ? 'now' : '' }, t),
            ),
          ),
      j.status === 'open'
        ? h(
            'p',
            { class: 'msg', id: 'next-step', dataset: { step: v.step } },
            h('strong', null, 'Next: '),
            v.next,
          )
        : null,
      j.status === 'open' && v.resonance_warning
        ? h(
            'p',
            { class: 'msg msg-warn', id: 'resonance-warning', role: 'alert' },
            v.resonance_warning,
          )
        : null,
      v.capture ? this.captureBlock(v.capture) : null,
      this.latestBlock(v),
      this.weightsBlock(v),
    );
  }

  /**
   * The newest result worth seeing first: the last run's residual or trial check, or the
   * correction.
   * @param {JobView} v
   */
  latestBlock(v) {
    const j = v.job;
    const last = [...j.runs].reverse().find((r) => r.capture && !r.discarded);
    if (!last || j.status !== 'open') return null;
    if (last.residual) return this.residualBlock(last, j, 'latest');
    if (v.step === 'correct' && j.solution?.result.ok) {
      const r = j.solution.result;
      return h(
        'div',
        { class: 'msg msg-ok' },
        h('strong', null, 'Correction (all trial weights removed): '),
        r.corrections
          .map((c) => `${c.plane} ${num(c.mass_g, 1)} g at ${deg(c.angle_deg)}`)
          .join(', '),
        '. Details below the form.',
      );
    }
    if (last.trial_check && !j.solution) return this.trialCheckBlock(last, 'latest');
    return null;
  }

  /** @param {NonNullable<JobView['capture']>} c */
  captureBlock(c) {
    return h(
      'div',
      { class: 'panel', id: 'capture-progress', dataset: { phase: c.phase } },
      h(
        'h3',
        null,
        c.phase === 'settling' ? 'Capturing: letting the reading settle' : 'Capturing: averaging',
      ),
      h(
        'label',
        null,
        `settle ${num(c.settled_revolutions, 0)} of ${c.settle_revolutions} revolutions`,
      ),
      h('progress', { max: c.settle_revolutions || 1, value: c.settled_revolutions }),
      h('label', null, `average ${num(c.measured_revolutions, 0)} of ${c.revolutions} revolutions`),
      h('progress', { max: c.revolutions, value: c.measured_revolutions }),
      h(
        'p',
        null,
        `speed ${num(c.speed_rpm, 0)} r/min; restarts after speed changes: ${c.restarts}`,
      ),
      c.waiting ? h('div', { class: 'msg msg-warn' }, c.waiting) : null,
      c.notes.map((/** @type {string} */ n) => h('div', { class: 'msg msg-warn' }, n)),
    );
  }

  /** @param {JobView} v */
  weightsBlock(v) {
    const w = v.weights_on_rotor;
    return h(
      'div',
      null,
      h('h3', null, 'Weights on the rotor now (relative to as found)'),
      w.length
        ? h(
            'ul',
            { id: 'weights-on-rotor' },
            w.map((x) => h('li', null, weightText(x))),
          )
        : h('p', { id: 'weights-on-rotor' }, 'none: the rotor as found'),
    );
  }

  /** @param {JobView} v */
  runsBlock(v) {
    const j = v.job;
    const sensors = j.setup.sensors;
    return h(
      'div',
      null,
      h('h2', null, 'Runs'),
      h(
        'p',
        null,
        `Each sensor: 1x amplitude in ${units.velocity} pk / phase ` +
          `lag. Weights: mass at angle, relative to as found.`,
      ),
      h(
        'div',
        { class: 'scroll' },
        h(
          'table',
          { id: 'runs' },
          h(
            'thead',
            null,
            h(
              'tr',
              null,
              h('th', null, '#'),
              h('th', null, 'run'),
              h('th', null, 'weights'),
              h('th', null, 'r/min'),
              sensors.map((/** @type {string} */ s) => h('th', null, s)),
              h('th', null, 'notes'),
            ),
          ),
          h(
            'tbody',
            null,
            j.runs.map((r) =>
              h(
                'tr',
                { dataset: { run: String(r.index), captured: r.capture ? 'yes' : 'no' } },
                h('td', { class: 'n' }, String(r.index)),
                h('td', null, r.label, r.discarded ? ' (left out)' : ''),
                h(
                  'td',
                  null,
                  r.weights.length
                    ? r.weights
                        .map((w) => `${w.id} ${num(w.mass_g, 1)} g @ ${deg(w.angle_deg)}`)
                        .join(', ')
                    : 'none',
                ),
                h('td', { class: 'n' }, r.capture ? num(r.capture.speed_rpm, 0) : 'not measured'),
                sensors.map((/** @type {string} */ s) => {
                  const x = r.capture?.readings[s];
                  return h(
                    'td',
                    { class: 'n' },
                    x ? `${vel(x.amp_pk_mm_s)} / ${deg(x.phase_deg)}` : '-',
                  );
                }),
                h(
                  'td',
                  null,
                  [
                    ...(r.capture?.notes ?? []),
                    ...r.capture_failures.map((f) => `capture failed: ${f.why}`),
                    r.discarded ? `left out: ${r.discarded.reason}` : '',
                  ]
                    .filter(Boolean)
                    .join('; '),
                ),
              ),
            ),
          ),
        ),
      ),
      j.runs.filter((r) => r.trial_check).map((r) => this.trialCheckBlock(r)),
      j.runs.filter((r) => r.residual).map((r) => this.residualBlock(r, j)),
    );
  }

  /** @param {WorkbenchRun} r @param {string} [where] */
  trialCheckBlock(r, where = 'runs') {
    const checks = r.trial_check ?? [];
    const enough = checks.some((t) => t.moved_enough);
    return h(
      'div',
      {
        class: 'trial-check',
        dataset: { run: String(r.index), enough: enough ? 'yes' : 'no', where },
      },
      h(
        'h3',
        null,
        `Did ${r.label} move the 1x enough? (at least 30 % ` +
          `in amplitude or 30\u00b0 in phase: common practice)`,
      ),
      h(
        'table',
        null,
        h(
          'tr',
          null,
          h('th', null, 'sensor'),
          h('th', null, 'amplitude change %'),
          h('th', null, 'phase change'),
          h('th', null, 'vector change %'),
          h('th', null, 'enough'),
        ),
        checks.map((t) =>
          h(
            'tr',
            null,
            h('td', null, t.sensor),
            h('td', { class: 'n' }, num(t.amp_change_pct, 1)),
            h('td', { class: 'n' }, `${num(t.phase_change_deg, 1)}\u00b0`),
            h('td', { class: 'n' }, num(t.vector_change_pct, 1)),
            h('td', { class: t.moved_enough ? 'yes' : 'no' }, t.moved_enough ? 'yes' : 'no'),
          ),
        ),
      ),
      enough
        ? null
        : h(
            'div',
            { class: 'msg msg-warn' },
            'No sensor moved enough: the correction would be sensitive ' +
              'to reading scatter. Repeat this run with a larger trial ' +
              'weight (leave this run out, then declare a new trial run).',
          ),
    );
  }

  /** @param {WorkbenchRun} r @param {JobView['job']} j @param {string} [where] */
  residualBlock(r, j, where = 'runs') {
    const x = r.residual;
    if (!x) return null;
    return h(
      'div',
      { class: 'panel residual', dataset: { run: String(r.index), where } },
      h('h3', null, `Residual after ${r.label}`),
      h(
        'table',
        null,
        h(
          'tr',
          null,
          h('th', null, 'sensor'),
          h('th', null, `as found ${units.velocity} pk`),
          h('th', null, `now ${units.velocity} pk`),
          h('th', null, 'phase'),
          h('th', null, '% of as found'),
        ),
        x.sensors.map((s) =>
          h(
            'tr',
            { dataset: { sensor: s.sensor, pct: String(s.pct_of_as_found) } },
            h('td', null, s.sensor),
            h('td', { class: 'n' }, vel(s.as_found_pk_mm_s)),
            h('td', { class: 'n' }, vel(s.amp_pk_mm_s)),
            h('td', { class: 'n' }, deg(s.phase_deg)),
            h('td', { class: 'n' }, num(s.pct_of_as_found, 1)),
          ),
        ),
      ),
      x.unbalance_g_mm
        ? h(
            'p',
            null,
            `Residual unbalance (through the job's influence coefficients): ${Object.entries(
              x.unbalance_g_mm,
            )
              .map(([p, u]) => `${p} ${num(/** @type {number} */ (u), 0)} g mm`)
              .join(', ')}. `,
            x.permissible_per_plane_g_mm !== null
              ? h(
                  'strong',
                  { class: x.within_grade ? 'yes' : 'no' },
                  `ISO 21940-11 G${num(j.setup.grade_mm_s, 1)}: ` +
                    `${num(x.permissible_g_mm, 0)} g mm for the rotor, ` +
                    `${num(x.permissible_per_plane_g_mm, 0)} g mm per plane shared equally: ` +
                    `${x.within_grade ? 'WITHIN the grade' : 'NOT within the grade'}.`,
                )
              : 'Give the rotor mass and a G grade to compare with ISO 21940-11.',
          )
        : null,
      x.trim.length
        ? h(
            'p',
            null,
            `Trim weights that would remove the residual: ` +
              `${x.trim.map((w) => `${w.plane} ${num(w.mass_g, 1)} g at ${deg(w.angle_deg)}`).join(', ')}.`,
          )
        : null,
      x.warnings.map((w) => h('div', { class: 'msg msg-warn' }, w.message, ' \u2192 ', w.hint)),
    );
  }

  /** @param {JobView} v */
  solutionBlock(v) {
    if (!v.job.solution) return null;
    const r = v.job.solution.result;
    const conv =
      v.job.setup.angle_convention === 'against_rotation' ? 'against rotation' : 'with rotation';
    const wtable = (/** @type {readonly PlaneWeight[]} */ ws, /** @type {string} */ id) =>
      h(
        'table',
        { id },
        h(
          'tr',
          null,
          h('th', null, 'plane'),
          h('th', null, 'mass g'),
          h('th', null, `angle (${conv})`),
          h('th', null, 'force N'),
          h('th', null, ''),
        ),
        ws.map((w) =>
          h(
            'tr',
            { dataset: { plane: w.plane, massG: String(w.mass_g), angleDeg: String(w.angle_deg) } },
            h('td', null, w.plane),
            h('td', { class: 'n' }, num(w.mass_g, 1)),
            h('td', { class: 'n' }, deg(w.angle_deg)),
            h('td', { class: 'n' }, num(w.force_n, 0)),
            h('td', { class: 'no' }, w.over_max ? "over the plane's maximum" : ''),
          ),
        ),
      );
    return h(
      'div',
      { class: 'panel', id: 'solution', dataset: { ok: r.ok ? 'yes' : 'no' } },
      h('h2', null, r.ok ? 'Correction' : 'No correction can be given'),
      r.ok
        ? [
            h(
              'h3',
              null,
              'Weights to add relative to the rotor as found, with ALL trial weights removed',
            ),
            wtable(r.corrections, 'corrections'),
            r.corrections_trials_left_in.length &&
            v.job.runs.some((x) => x.weights.some((w) => w.role === 'trial'))
              ? [
                  h('h3', null, 'Or, leaving the weights of the last trial run on the rotor, add'),
                  wtable(r.corrections_trials_left_in, 'corrections-left-in'),
                ]
              : null,
            r.static_couple
              ? h(
                  'p',
                  null,
                  `The same correction as a static pair: ` +
                    `${num(r.static_couple.static_pair.mass_g_each, 1)} g in each plane at ` +
                    `${deg(r.static_couple.static_pair.angle_deg)}; and a couple pair: ` +
                    `${num(r.static_couple.couple_pair.mass_g_each, 1)} g, ${r.planes[0]} at ` +
                    `${deg(r.static_couple.couple_pair.angle_deg_first_plane)} and ` +
                    `${r.planes[1]} at ` +
                    `${deg(r.static_couple.couple_pair.angle_deg_second_plane)}.`,
                )
              : null,
          ]
        : r.problems.map((p) =>
            h('div', { class: 'msg msg-error' }, p.message, ' \u2192 ', p.hint),
          ),
      r.influence_coefficients.length
        ? [
            h(
              'h3',
              null,
              `Influence coefficients (1x a 1 g weight on the ` +
                `reference mark adds, ${units.velocity} pk per g)`,
            ),
            h(
              'table',
              null,
              h(
                'tr',
                null,
                h('th', null, 'sensor'),
                h('th', null, 'plane'),
                h('th', null, 'per g'),
                h('th', null, 'phase'),
              ),
              r.influence_coefficients.map((c) =>
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
            ),
          ]
        : null,
      r.condition_number !== null
        ? h(
            'p',
            null,
            `Condition number of the influence matrix: ${num(r.condition_number, 2)} (1 ` +
              `is ideal; above 10 reading errors are amplified).`,
          )
        : null,
      r.warnings.map((w) => h('div', { class: 'msg msg-warn' }, w.message, ' \u2192 ', w.hint)),
    );
  }

  // ---- forms (rebuilt when the step changes) ----

  startForm() {
    const s = this.session;
    const d = s.balance_defaults;
    const form = h('form', { class: 'panel', id: 'start-form' });
    const planeRow = (/** @type {number} */ i) => {
      const p = d.planes[i] ?? {};
      return h(
        'fieldset',
        { class: 'grid', dataset: { plane: String(i) } },
        h('legend', null, `Plane ${i + 1}`),
        field(`plane${i}_name`, 'name', p.name ?? (i === 0 ? 'P1' : 'P2')),
        numField(`plane${i}_radius`, 'weight radius', p.radius_mm, 'mm'),
        numField(`plane${i}_max`, 'largest weight it takes', p.max_mass_g, 'g'),
        numField(
          `plane${i}_count`,
          'fixed positions (blades, holes), if any',
          p.positions?.count,
          'count',
        ),
        numField(`plane${i}_first`, 'angle of position 0', p.positions?.first_deg, 'deg'),
      );
    };
    const plane2 = planeRow(1);
    const kind = h(
      'select',
      {
        name: 'kind',
        id: 'f-kind',
        onchange: () =>
          (plane2.hidden = ['single_plane', 'trim'].includes(
            /** @type {HTMLSelectElement} */ (kind).value,
          )),
      },
      h('option', { value: 'two_plane' }, 'two-plane'),
      h('option', { value: 'single_plane' }, 'single-plane'),
      h(
        'option',
        { value: 'static_couple' },
        'static-couple (two planes, static and couple trial pairs)',
      ),
      h(
        'option',
        { value: 'trim' },
        'trim run from the stored influence coefficients (no trial runs)',
      ),
    );
    append(
      form,
      h('h2', null, 'Start a balancing job'),
      h('label', { for: 'f-kind' }, 'Kind of job'),
      kind,
      h(
        'fieldset',
        null,
        h('legend', null, 'Weight angles are measured from the reference mark'),
        ['against_rotation', 'with_rotation'].map((c) =>
          h(
            'label',
            { class: 'check' },
            h('input', {
              type: 'radio',
              name: 'convention',
              value: c,
              checked: c === d.angle_convention,
            }),
            c === 'against_rotation'
              ? 'AGAINST the direction of rotation'
              : 'WITH the direction of rotation',
          ),
        ),
      ),
      field('by', 'Your name (recorded with every step)', '', {
        required: true,
        maxlength: 64,
        autocomplete: 'name',
      }),
      planeRow(0),
      plane2,
      h(
        'fieldset',
        null,
        h('legend', null, 'Sensors read in every run'),
        s.sensors.map((x) =>
          h(
            'label',
            { class: 'check' },
            h('input', {
              type: 'checkbox',
              name: 'sensor',
              value: x.id,
              checked: x.direction !== 'axial',
            }),
            `${x.id} (${x.bearing}, ${x.direction})`,
          ),
        ),
      ),
      h(
        'div',
        { class: 'grid' },
        numField('rotor', 'rotor mass', d.rotor_mass_kg, 'kg'),
        numField('bearings', 'bearings carrying it', d.bearings, 'count'),
        field(
          'grade',
          'ISO 21940-11 grade (e.g. G6.3)',
          d.grade_mm_s ? `G${d.grade_mm_s}` : 'G6.3',
        ),
        numField('speed', 'balancing speed (empty: measured)', '', 'r/min'),
      ),
      field('notes', 'Notes', ''),
      h(
        'div',
        { class: 'buttons' },
        h('button', { type: 'submit', class: 'primary', id: 'job-start' }, 'Start the job'),
      ),
    );
    form.addEventListener('submit', (ev) => {
      ev.preventDefault();
      const k = /** @type {HTMLSelectElement} */ (kind).value;
      const nPlanes = ['single_plane', 'trim'].includes(k) ? 1 : 2;
      const planes = [];
      for (let i = 0; i < nPlanes; i++) {
        const count = numVal(form, `plane${i}_count`);
        planes.push({
          name: val(form, `plane${i}_name`),
          radius_mm: numVal(form, `plane${i}_radius`),
          ...(numVal(form, `plane${i}_max`) !== undefined
            ? { max_mass_g: numVal(form, `plane${i}_max`) }
            : {}),
          ...(count !== undefined
            ? { positions: { count, first_deg: numVal(form, `plane${i}_first`) ?? 0 } }
            : {}),
        });
      }
      const conv = /** @type {HTMLInputElement | null} */ (
        form.querySelector('input[name=convention]:checked')
      )?.value;
      const body = {
        kind: k,
        angle_convention: conv,
        by: val(form, 'by'),
        ...(k === 'trim' ? {} : { planes }),
        sensors: Array.from(form.querySelectorAll('input[name=sensor]:checked')).map(
          (x) => /** @type {HTMLInputElement} */ (x).value,
        ),
        ...(numVal(form, 'rotor') !== undefined ? { rotor_mass_kg: numVal(form, 'rotor') } : {}),
        ...(numVal(form, 'bearings') !== undefined ? { bearings: numVal(form, 'bearings') } : {}),
        ...(val(form, 'grade') ? { grade: val(form, 'grade') } : {}),
        ...(numVal(form, 'speed') !== undefined ? { speed_rpm: numVal(form, 'speed') } : {}),
        ...(val(form, 'notes') ? { notes: val(form, 'notes') } : {}),
      };
      void this.act(
        '/api/jobs',
        body,
        'Job started. Bring the fan to steady speed and capture the as-found run.',
      );
    });
    return form;
  }

  /** @param {JobView} v */
  stepForm(v) {
    const j = v.job;
    if (j.status !== 'open')
      return h(
        'div',
        { class: 'buttons' },
        this.mayAct
          ? h(
              'button',
              {
                class: 'primary',
                id: 'new-job',
                onclick: () => {
                  this.closed = null;
                  this.formKey = '';
                  this.render();
                },
              },
              'Start another job',
            )
          : null,
      );
    if (!this.mayAct)
      return h(
        'p',
        { class: 'msg msg-warn' },
        'Viewer token: you can follow the job but not change it.',
      );
    const id = encodeURIComponent(j.job_id);
    const parts = [];
    if (v.step === 'capture') parts.push(this.captureForm(v, id));
    if (v.step === 'trial' || v.step === 'solve') {
      if (v.step === 'solve')
        parts.push(
          h(
            'div',
            { class: 'panel' },
            h('h2', null, 'Solve'),
            h(
              'p',
              null,
              j.setup.kind === 'trim'
                ? 'The correction comes from the stored ' +
                    'influence coefficients and the as-found run.'
                : 'The influence coefficients come from the trial runs; ' +
                    'the correction follows from them and the as-found run.',
            ),
            h(
              'div',
              { class: 'buttons' },
              h(
                'button',
                {
                  class: 'primary',
                  id: 'solve',
                  onclick: () => void this.act(`/api/jobs/${id}/solve`, {}, 'Solved.'),
                },
                'Solve',
              ),
            ),
          ),
        );
      if (j.setup.kind !== 'trim')
        parts.push(
          v.step === 'trial'
            ? this.trialForm(v, id)
            : h(
                'details',
                null,
                h('summary', null, 'Add another trial run'),
                this.trialForm(v, id),
              ),
        );
      const lastTrial = [...j.runs]
        .reverse()
        .find((r) => r.purpose === 'trial' && r.capture && !r.discarded);
      if (lastTrial) parts.push(this.discardForm(id, lastTrial));
    }
    if (v.step === 'correct' || v.step === 'check') {
      if (v.proposals.length) parts.push(this.correctionForm(v, id));
      if (v.step === 'check') parts.push(this.finishForm(id));
      const lastCheck = j.runs[j.runs.length - 1];
      if (v.step === 'check' && lastCheck.purpose === 'check')
        parts.push(this.discardForm(id, lastCheck));
    }
    parts.push(this.abandonForm(id, v));
    return parts;
  }

  /** @param {JobView} v @param {string} id */
  captureForm(v, id) {
    const last = v.job.runs[v.job.runs.length - 1];
    const running = !!v.capture;
    const revs = h('input', {
      type: 'number',
      name: 'revolutions',
      id: 'f-revolutions',
      value: this.session.capture.revolutions,
      min: 10,
      step: 1,
    });
    return h(
      'div',
      { class: 'panel', id: 'capture-form' },
      h('h2', null, `Measure ${last.label}`),
      last.changes.length
        ? [
            h(
              'p',
              null,
              'The weight change recorded for this run. Check ' +
                'it is done exactly so before the fan is started:',
            ),
            h(
              'ol',
              { class: 'placement', id: 'placement', dataset: { run: String(last.index) } },
              last.changes.map((c) =>
                h(
                  'li',
                  {
                    dataset: {
                      action: c.action,
                      id: c.weight.id,
                      plane: c.weight.plane,
                      massG: String(c.weight.mass_g),
                      angleDeg: String(c.weight.angle_deg),
                      radiusMm: String(c.weight.radius_mm),
                    },
                  },
                  `${c.action === 'fit' ? 'FIT' : 'REMOVE'} ${weightText(c.weight)}`,
                  c.force_n !== null ? ` (pulls ${num(c.force_n, 0)} N at speed)` : '',
                ),
              ),
            ),
          ]
        : h('p', null, 'No weight change: the rotor as found.'),
      h(
        'div',
        { class: 'cautions' },
        h('h3', null, 'Before start-up'),
        h(
          'ul',
          null,
          h(
            'li',
            null,
            'Everyone clear of the fan; nobody in line ' +
              'with the impeller (in its plane of rotation).',
          ),
          h(
            'li',
            null,
            'Every weight secured as the fan maker allows; tools and loose parts removed.',
          ),
          h(
            'li',
            null,
            'Watch the vibration during the run; stop the fan at once ' +
              "if it climbs into zone D or to the plant's trip level.",
          ),
        ),
      ),
      h(
        'p',
        null,
        `Run the fan at steady speed. The reading settles over ` +
          `${this.session.capture.settle_revolutions} revolutions, ` +
          `then the 1x vectors are averaged over:`,
      ),
      h('label', { for: 'f-revolutions' }, 'revolutions'),
      revs,
      h(
        'div',
        { class: 'buttons' },
        h(
          'button',
          {
            class: 'primary',
            id: 'capture-start',
            disabled: running,
            onclick: () =>
              void this.act(
                `/api/jobs/${id}/capture`,
                { revolutions: Number(/** @type {HTMLInputElement} */ (revs).value) },
                'Capturing: keep the fan at steady speed.',
              ),
          },
          last.capture_failures.length ? 'Capture again' : 'Start capture',
        ),
        h(
          'button',
          {
            id: 'capture-cancel',
            onclick: () =>
              void this.act(`/api/jobs/${id}/capture/cancel`, {}, 'Capture cancelled.'),
          },
          'Cancel capture',
        ),
        last.purpose !== 'as_found'
          ? h(
              'button',
              {
                class: 'danger',
                id: 'withdraw',
                onclick: () =>
                  void this.act(
                    `/api/jobs/${id}/runs/${last.index}/discard`,
                    { reason: 'weight change entered wrongly' },
                    'Weight change withdrawn: enter it again.',
                  ),
              },
              'Withdraw this weight change',
            )
          : null,
      ),
    );
  }

  /**
   * The safety cautions with the forces of the weights about to be fitted, and the confirmation
   * that enables the button.
   * @param {() => Array<{ label: string, mass_g: number, radius_mm: number }>} weights
   * @param {HTMLButtonElement} button
   * @param {JobView} v
   */
  cautionBlock(weights, button, v) {
    const speed = v.speed_for_forces_rpm;
    const list = h('ul');
    const setup = v.job.setup;
    const refresh = () => {
      fill(
        list,
        this.session.cautions.map((/** @type {string} */ c) => h('li', null, c)),
        weights().map((w) => {
          const f = forceN(w.mass_g, w.radius_mm, speed);
          const share =
            f !== null && setup.rotor_mass_kg
              ? (100 * f) / ((setup.rotor_mass_kg / setup.bearings) * 9.80665)
              : null;
          return h(
            'li',
            null,
            h(
              'strong',
              null,
              `${w.label}: ${num(w.mass_g, 1)} g at ${num(w.radius_mm, 0)} mm pulls F = m ` +
                `r \u03c9\u00b2 = ${f === null ? '? (speed unknown)' : `${num(f, 0)} N`} at ` +
                `${num(speed, 0)} r/min`,
            ),
            share !== null ? ` (${num(share, 0)} % of the rotor weight on one bearing)` : '',
          );
        }),
      );
    };
    refresh();
    const ack = /** @type {HTMLInputElement} */ (
      h('input', {
        type: 'checkbox',
        id: 'ack',
        name: 'ack',
        onchange: () => (button.disabled = !ack.checked),
      })
    );
    button.disabled = true;
    return {
      block: h(
        'div',
        { class: 'cautions', id: 'cautions' },
        h('h3', null, 'SAFETY: before anyone touches the rotor'),
        list,
        h(
          'label',
          { class: 'check' },
          ack,
          'I have read these cautions. The fan is locked ' +
            'out and tagged out while weights are changed.',
        ),
      ),
      refresh,
      ack,
    };
  }

  /** @param {JobView} v @param {string} id */
  trialForm(v, id) {
    const j = v.job;
    const s = j.setup;
    const measuredTrials = j.runs.filter(
      (r) => r.purpose === 'trial' && r.capture && !r.discarded,
    ).length;
    const n = measuredTrials + 1;
    const sc = s.kind === 'static_couple';
    const plane = s.planes[Math.min(n - 1, s.planes.length - 1)];
    const sug = v.trial_suggestion?.find((t) => t.plane === plane.name);
    const trialsOn = v.weights_on_rotor.filter((w) => w.role === 'trial');
    const form = h('form', { class: 'panel', id: 'trial-form' });
    const button = /** @type {HTMLButtonElement} */ (
      h('button', { type: 'submit', class: 'primary', id: 'declare-run' }, 'Record weight change')
    );
    const what = sc
      ? n === 1
        ? 'Static pair: the same weight in both planes at the same angle'
        : 'Couple pair: the same weight in both planes, 180\u00b0 apart'
      : `Trial weight in plane ${plane.name}`;
    const weights = () => {
      const m = Number(val(form, 'mass')) || 0;
      const r = Number(val(form, 'radius')) || plane.radius_mm;
      return sc
        ? s.planes.map((p) => ({ label: `trial weight in ${p.name}`, mass_g: m, radius_mm: r }))
        : [{ label: `trial weight in ${plane.name}`, mass_g: m, radius_mm: r }];
    };
    const caution = this.cautionBlock(weights, button, v);
    append(
      form,
      h('h2', null, `Trial run ${n}`),
      h('p', null, what, '.'),
      sug
        ? h(
            'p',
            { id: 'trial-suggestion' },
            `Suggested: ${num(sug.mass_g, 0)} g at ${num(sug.radius_mm, 0)} mm, ` +
              `a force of ${num(sug.force_n, 0)} N, 10 % of the ` +
              `${num(sug.bearing_load_kg, 0)} kg on one bearing (common practice). ` +
              `After the run, the 1x should have moved by 30 % or 30\u00b0.`,
          )
        : h('p', null, v.trial_suggestion_missing ?? ''),
      h(
        'div',
        { class: 'grid' },
        numField(
          'mass',
          sc ? 'mass in each plane' : 'mass',
          sug ? Math.round(sug.mass_g) : '',
          'g',
          { required: true, oninput: caution.refresh },
        ),
        numField(
          'angle',
          `angle (${s.angle_convention === 'against_rotation' ? 'against' : 'with'} rotation)`,
          0,
          'deg',
          { required: true },
        ),
        numField('radius', 'radius', plane.radius_mm, 'mm', { oninput: caution.refresh }),
      ),
      trialsOn.length
        ? h(
            'fieldset',
            null,
            h(
              'legend',
              null,
              `Trial weight(s) now on the rotor: ${trialsOn.map((w) => w.id).join(', ')}`,
            ),
            h(
              'label',
              { class: 'check' },
              h('input', { type: 'radio', name: 'previous', value: 'remove', checked: true }),
              'take them off for this run',
            ),
            h(
              'label',
              { class: 'check' },
              h('input', { type: 'radio', name: 'previous', value: 'keep' }),
              'leave them on',
            ),
          )
        : null,
      caution.block,
      h('div', { class: 'buttons' }, button),
    );
    caution.refresh(); // now that the fields exist
    form.addEventListener('submit', (ev) => {
      ev.preventDefault();
      const mass = Number(val(form, 'mass'));
      const angle = Number(val(form, 'angle'));
      const radius = Number(val(form, 'radius'));
      const add = sc
        ? s.planes.map((p, i) => ({
            plane: p.name,
            mass_g: mass,
            angle_deg: n === 2 && i === 1 ? angle + 180 : angle,
            radius_mm: radius,
          }))
        : [{ plane: plane.name, mass_g: mass, angle_deg: angle, radius_mm: radius }];
      const keep =
        /** @type {HTMLInputElement | null} */ (form.querySelector('input[name=previous]:checked'))
          ?.value === 'keep';
      void this.act(
        `/api/jobs/${id}/runs`,
        {
          purpose: 'trial',
          remove: keep ? [] : 'all_trials',
          add,
          acknowledge_cautions: caution.ack.checked,
        },
        'Weight change recorded. Run the fan and capture.',
      );
    });
    return form;
  }

  /** @param {JobView} v @param {string} id */
  correctionForm(v, id) {
    const form = h('form', { class: 'panel', id: 'correction-form' });
    const button = /** @type {HTMLButtonElement} */ (
      h('button', { type: 'submit', class: 'primary', id: 'declare-run' }, 'Record weight change')
    );
    const j = v.job;
    const rowsOf = (/** @type {ProposedChange} */ p, /** @type {boolean} */ split) =>
      /** @type {ReadonlyArray<ProposedChange['add'][number] & { position?: number }>} */ (
        split && p.add_split ? p.add_split : p.add
      );
    /** @type {HTMLElement[]} */
    const cards = [];
    v.proposals.forEach((p, k) => {
      const body = h('div');
      const splitBox = p.add_split
        ? /** @type {HTMLInputElement} */ (h('input', { type: 'checkbox', name: `split${k}` }))
        : null;
      const draw = () => {
        const rows = rowsOf(p, !!splitBox?.checked);
        fill(
          body,
          p.remove === 'all_trials'
            ? h(
                'p',
                null,
                `Take off: ${v.weights_on_rotor
                  .filter((w) => w.role === 'trial')
                  .map((w) => w.id)
                  .join(', ')}`,
              )
            : null,
          h(
            'table',
            null,
            h(
              'tr',
              null,
              h('th', null, 'plane'),
              h('th', null, 'mass g'),
              h('th', null, 'angle deg'),
              h('th', null, 'radius mm'),
            ),
            rows.map((a, /** @type {number} */ i) =>
              h(
                'tr',
                { dataset: { row: String(i) } },
                h(
                  'td',
                  null,
                  a.plane,
                  a.position !== undefined && a.position >= 0 ? ` (position ${a.position})` : '',
                ),
                h(
                  'td',
                  null,
                  h('input', {
                    type: 'number',
                    step: 'any',
                    name: `m${k}_${i}`,
                    value: num(a.mass_g, 1),
                    oninput: caution.refresh,
                  }),
                ),
                h(
                  'td',
                  null,
                  h('input', {
                    type: 'number',
                    step: 'any',
                    name: `a${k}_${i}`,
                    value: num(a.angle_deg, 1),
                  }),
                ),
                h(
                  'td',
                  null,
                  h('input', {
                    type: 'number',
                    step: 'any',
                    name: `r${k}_${i}`,
                    value: num(a.radius_mm, 0),
                    oninput: caution.refresh,
                  }),
                ),
              ),
            ),
          ),
          h(
            'p',
            null,
            'Change the figures to what you actually fitted (another ' +
              'radius: mass x r_old / r_new, see the tools below).',
          ),
        );
      };
      cards.push(
        h(
          'div',
          { class: 'panel proposal', dataset: { proposal: String(k) } },
          h(
            'label',
            { class: 'check' },
            h('input', {
              type: 'radio',
              name: 'proposal',
              value: String(k),
              checked: k === 0,
              onchange: () => caution.refresh(),
            }),
            h('strong', null, p.title),
          ),
          splitBox
            ? h('label', { class: 'check' }, splitBox, 'split onto the fixed positions')
            : null,
          body,
        ),
      );
      splitBox?.addEventListener('change', () => {
        draw();
        caution.refresh();
      });
      setTimeout(() => {
        draw();
        caution.refresh();
      });
    });
    const chosen = () =>
      Number(
        /** @type {HTMLInputElement | null} */ (form.querySelector('input[name=proposal]:checked'))
          ?.value ?? 0,
      );
    const rowsNow = () => {
      const k = chosen();
      const p = v.proposals[k];
      const split =
        /** @type {HTMLInputElement | null} */ (form.querySelector(`input[name=split${k}]`))
          ?.checked ?? false;
      return rowsOf(p, split).map((a, /** @type {number} */ i) => ({
        plane: a.plane,
        mass_g: Number(val(form, `m${k}_${i}`) || a.mass_g),
        angle_deg: Number(val(form, `a${k}_${i}`) || a.angle_deg),
        radius_mm: Number(val(form, `r${k}_${i}`) || a.radius_mm),
      }));
    };
    const caution = this.cautionBlock(
      () =>
        rowsNow().map((r) => ({
          label: `weight in ${r.plane}`,
          mass_g: r.mass_g,
          radius_mm: r.radius_mm,
        })),
      button,
      v,
    );
    append(
      form,
      h('h2', null, v.step === 'check' ? 'Trim' : 'Fit the correction'),
      h('div', { class: 'conv-banner' }, `Conventions: ${v.convention}.`),
      cards,
      caution.block,
      h('div', { class: 'buttons' }, button),
    );
    form.addEventListener('submit', (ev) => {
      ev.preventDefault();
      const p = v.proposals[chosen()];
      void this.act(
        `/api/jobs/${id}/runs`,
        {
          purpose: 'check',
          remove: p.remove,
          add: rowsNow(),
          acknowledge_cautions: caution.ack.checked,
        },
        'Weight change recorded. Run the fan and capture the check run.',
      );
    });
    return form;
  }

  /** @param {string} id */
  finishForm(id) {
    const note = h('input', { name: 'note', id: 'f-note', maxlength: 2000 });
    return h(
      'div',
      { class: 'panel' },
      h('h2', null, 'Finish'),
      h(
        'p',
        null,
        'Finishing keeps the job record and its influence coefficients ' +
          "(for the watcher's balance forecast and later trim runs).",
      ),
      h('label', { for: 'f-note' }, 'Closing note'),
      note,
      h(
        'div',
        { class: 'buttons' },
        h(
          'button',
          {
            class: 'primary',
            id: 'finish',
            onclick: () =>
              void this.act(
                `/api/jobs/${id}/finish`,
                { note: /** @type {HTMLInputElement} */ (note).value || undefined },
                'Job finished and recorded.',
              ),
          },
          'Finish the job',
        ),
      ),
    );
  }

  /** @param {string} id @param {WorkbenchRun} run */
  discardForm(id, run) {
    const reason = h('input', { name: 'reason', maxlength: 500, value: '' });
    return h(
      'details',
      null,
      h('summary', null, `Leave ${run.label} out`),
      h('label', null, 'Why'),
      reason,
      h(
        'div',
        { class: 'buttons' },
        h(
          'button',
          {
            class: 'danger',
            onclick: () =>
              void this.act(
                `/api/jobs/${id}/runs/${run.index}/discard`,
                { reason: /** @type {HTMLInputElement} */ (reason).value },
                `${run.label} left out.`,
              ),
          },
          `Leave ${run.label} out`,
        ),
      ),
    );
  }

  /** @param {string} id @param {JobView} v */
  abandonForm(id, v) {
    const reason = h('input', { name: 'reason', maxlength: 500, value: '' });
    return h(
      'details',
      null,
      h('summary', null, 'Abandon this job'),
      v.weights_on_rotor.length
        ? h(
            'p',
            { class: 'msg msg-warn' },
            `Still on the rotor: ${v.weights_on_rotor.map((w) => weightText(w)).join('; ')}.`,
          )
        : null,
      h('label', null, 'Why'),
      reason,
      h(
        'div',
        { class: 'buttons' },
        h(
          'button',
          {
            class: 'danger',
            id: 'abandon',
            onclick: () =>
              void this.act(
                `/api/jobs/${id}/abandon`,
                { reason: /** @type {HTMLInputElement} */ (reason).value },
                'Job abandoned.',
              ),
          },
          'Abandon',
        ),
      ),
    );
  }

  // ---- tools ----

  buildTools() {
    /**
     * @param {string} title
     * @param {any[]} fields
     * @param {(f: HTMLElement) => [string, any]} request
     * @param {(r: any) => string} show
     */
    const tool = (title, fields, request, show) => {
      const out = h('div', { class: 'result', 'aria-live': 'polite' });
      const form = h(
        'form',
        { class: 'tool' },
        h('h3', null, title),
        h('div', { class: 'grid' }, fields),
        h('button', { type: 'submit' }, 'Work it out'),
        out,
      );
      form.addEventListener('submit', async (ev) => {
        ev.preventDefault();
        const [path, body] = request(form);
        try {
          fill(out, show(await api.post(path, body)));
        } catch (e) {
          fill(out, errorBox(e));
        }
      });
      return form;
    };
    const n = (/** @type {HTMLElement} */ f, /** @type {string} */ k) => numVal(f, k);
    return h(
      'details',
      { class: 'tools' },
      h(
        'summary',
        null,
        'Weight tools: trial weight, split, other radius, ' +
          'combine, ISO 21940-11 grade, balancing without phase',
      ),
      h(
        'p',
        null,
        'Angles in these tools are in one convention of ' +
          'your choice, the same for every angle you enter.',
      ),
      this.fourRunTool(),
      tool(
        'Trial weight (force 10 % of the rotor weight on one bearing, common practice)',
        [
          numField('t_rotor', 'rotor mass', this.session.balance_defaults.rotor_mass_kg, 'kg'),
          numField('t_bearings', 'bearings', this.session.balance_defaults.bearings, 'count'),
          numField('t_radius', 'radius', '', 'mm'),
          numField('t_speed', 'speed', this.session.rated_rpm, 'r/min'),
        ],
        (f) => [
          '/api/tools/trial-weight',
          {
            rotor_mass_kg: n(f, 't_rotor'),
            bearings: n(f, 't_bearings'),
            radius_mm: n(f, 't_radius'),
            speed_rpm: n(f, 't_speed'),
          },
        ],
        (r) =>
          `${num(r.mass_g, 1)} g at ${num(r.radius_mm, 0)} mm: ` +
          `${num(r.force_n, 0)} N at ${num(r.speed_rpm, 0)} r/min`,
      ),
      tool(
        'Split onto fixed positions (law of sines)',
        [
          numField('s_mass', 'mass', '', 'g'),
          numField('s_angle', 'angle', '', 'deg'),
          numField('s_radius', 'radius of the weight', '', 'mm'),
          numField('s_count', 'positions', '', 'count'),
          numField('s_first', 'angle of position 0', 0, 'deg'),
          numField('s_pradius', 'radius of the positions', '', 'mm'),
        ],
        (f) => [
          '/api/tools/split',
          {
            mass_g: n(f, 's_mass'),
            angle_deg: n(f, 's_angle'),
            ...(n(f, 's_radius') !== undefined || n(f, 's_pradius') !== undefined
              ? { radius_mm: n(f, 's_radius') }
              : {}),
            positions: {
              count: n(f, 's_count'),
              first_deg: n(f, 's_first') ?? 0,
              ...(n(f, 's_radius') !== undefined || n(f, 's_pradius') !== undefined
                ? { radius_mm: n(f, 's_pradius') }
                : {}),
            },
          },
        ],
        (r) =>
          r.weights
            .map((w) => `position ${w.position} (${deg(w.angle_deg)}): ${num(w.mass_g, 2)} g`)
            .join('; '),
      ),
      tool(
        'Split between two holes at any angles (or the two nearest of a list)',
        [
          numField('h_mass', 'mass', '', 'g'),
          numField('h_angle', 'angle', '', 'deg'),
          field('h_holes', 'hole angles, deg, comma-separated', ''),
        ],
        (f) => [
          '/api/tools/split',
          {
            mass_g: n(f, 'h_mass'),
            angle_deg: n(f, 'h_angle'),
            holes: {
              angles_deg: val(f, 'h_holes')
                .split(',')
                .filter((x) => x.trim() !== '')
                .map(Number),
            },
          },
        ],
        (r) =>
          r.weights
            .map((w) => `hole ${w.position} (${deg(w.angle_deg)}): ${num(w.mass_g, 2)} g`)
            .join('; ') +
          ` (together ${num(r.total_mass_g, 2)} g)` +
          r.warnings.map((w) => `. ${w.message}`).join(''),
      ),
      tool(
        'Same unbalance at another radius (mass x r_old / r_new)',
        [
          numField('r_mass', 'mass', '', 'g'),
          numField('r_from', 'from radius', '', 'mm'),
          numField('r_to', 'to radius', '', 'mm'),
        ],
        (f) => [
          '/api/tools/move-radius',
          { mass_g: n(f, 'r_mass'), from_radius_mm: n(f, 'r_from'), to_radius_mm: n(f, 'r_to') },
        ],
        (r) => `${num(r.mass_g, 2)} g at ${num(r.radius_mm, 0)} mm`,
      ),
      tool(
        'Combine weights in one plane (vector sum)',
        [0, 1, 2]
          .map((i) => [
            numField(`c_m${i}`, `mass ${i + 1}`, '', 'g'),
            numField(`c_a${i}`, `angle ${i + 1}`, '', 'deg'),
          ])
          .flat(),
        (f) => [
          '/api/tools/combine',
          {
            weights: [0, 1, 2]
              .filter((i) => n(f, `c_m${i}`) !== undefined)
              .map((i) => ({ mass_g: n(f, `c_m${i}`), angle_deg: n(f, `c_a${i}`) ?? 0 })),
          },
        ],
        (r) => `one weight of ${num(r.mass_g, 2)} g at ${deg(r.angle_deg)}`,
      ),
      tool(
        'ISO 21940-11 permissible residual unbalance',
        [
          numField('g_rotor', 'rotor mass', this.session.balance_defaults.rotor_mass_kg, 'kg'),
          numField('g_speed', 'speed', this.session.rated_rpm, 'r/min'),
          field(
            'g_grade',
            'grade',
            this.session.balance_defaults.grade_mm_s
              ? `G${this.session.balance_defaults.grade_mm_s}`
              : 'G6.3',
          ),
          numField('g_res', 'residual (optional)', '', 'g mm'),
        ],
        (f) => [
          '/api/tools/grade',
          {
            rotor_mass_kg: n(f, 'g_rotor'),
            speed_rpm: n(f, 'g_speed'),
            grade: val(f, 'g_grade'),
            ...(n(f, 'g_res') !== undefined ? { residual_g_mm: n(f, 'g_res') } : {}),
          },
        ],
        (r) =>
          `U_per = ${num(r.permissible_g_mm, 0)} g mm for the ` +
          `rotor${r.within === null ? '' : r.within ? ': the residual is WITHIN it' : ': the residual is NOT within it'}`,
      ),
    );
  }

  /**
   * Balancing without phase (the four-run method) for when the once-per-turn pickup is missing or
   * failed: as found, then one trial weight at three positions; each amplitude typed in or read
   * from the latest analysis window ("Read": the synchronous 1x if the tach works, else the
   * spectral peak near the stated speed). One plane, one sensor.
   */
  fourRunTool() {
    const radial = this.session.sensors.filter((x) => x.direction !== 'axial');
    const out = h('div', { class: 'result', id: 'fourrun-result', 'aria-live': 'polite' });
    const note = h('div', { class: 'result', id: 'fourrun-read', 'aria-live': 'polite' });
    /** @param {string} name */
    const readButton = (name) => {
      const b = h('button', { type: 'button', class: 'read', dataset: { reads: name } }, 'Read');
      b.addEventListener('click', async () => {
        const sensor = val(form, 'fr_sensor');
        const speed = numVal(form, 'fr_speed');
        try {
          const r = await api.post('/api/tools/one-x-amplitude', { sensor, speed_rpm: speed });
          const input = /** @type {HTMLInputElement} */ (form.querySelector(`[name="${name}"]`));
          input.value = r.amp_pk_mm_s.toFixed(3);
          fill(
            note,
            `${sensor}: ${num(r.amp_pk_mm_s, 3)} mm/s pk ` +
              `${r.upper_bound ? '(below the peak threshold: an upper bound) ' : ''}from ` +
              `${r.source === 'tach' ? 'the synchronous 1x' : `the spectral peak at ${num(r.freq_hz, 2)} Hz (no tach)`}, ` +
              `window of ${num(r.window_s, 1)} s ending ` +
              `${when(new Date(r.window_end_ms).toISOString())}. Wait for ` +
              `a fresh window after every weight change.`,
          );
        } catch (e) {
          fill(note, errorBox(e));
        }
      });
      return b;
    };
    /** @param {string} name @param {string} label */
    const ampField = (name, label) =>
      h(
        'div',
        null,
        h('label', { for: `f-${name}` }, `${label} (mm/s pk)`),
        h(
          'div',
          { class: 'with-button' },
          h('input', { id: `f-${name}`, name, type: 'number', step: 'any', inputmode: 'decimal' }),
          readButton(name),
        ),
      );
    const form = h(
      'form',
      { class: 'tool', id: 'fourrun' },
      h(
        'h3',
        null,
        'Balancing without phase (four-run method: as found, trial weight at three positions)',
      ),
      h(
        'p',
        null,
        'For when the tach pickup cannot be mounted or has failed. Fit the same trial ' +
          'weight at the three positions in turn (same radius), run at the same speed, ' +
          'read the 1x after each; take the trial weight off before fitting the correction.',
      ),
      h(
        'div',
        { class: 'grid' },
        h(
          'div',
          null,
          h('label', { for: 'f-fr_sensor' }, 'sensor'),
          h(
            'select',
            { id: 'f-fr_sensor', name: 'fr_sensor' },
            radial.map((x) =>
              h('option', { value: x.id }, `${x.id} (${x.bearing}, ${x.direction})`),
            ),
          ),
        ),
        numField(
          'fr_speed',
          'running speed you read (tachometer, drive)',
          this.session.rated_rpm,
          'r/min',
        ),
        h(
          'div',
          null,
          h('label', { for: 'f-fr_conv' }, 'angles measured'),
          h(
            'select',
            { id: 'f-fr_conv', name: 'fr_conv' },
            h('option', { value: 'against_rotation' }, 'against rotation'),
            h('option', { value: 'with_rotation' }, 'with rotation'),
          ),
        ),
        numField('fr_mass', 'trial mass', '', 'g'),
        numField('fr_radius', 'radius (optional)', '', 'mm'),
        ampField('fr_a0', 'as found'),
        [0, 1, 2]
          .map((k) => [
            numField(`fr_t${k}`, `trial position ${k + 1}`, [0, 120, 240][k], 'deg'),
            ampField(`fr_a${k + 1}`, `with the trial weight at position ${k + 1}`),
          ])
          .flat(),
      ),
      note,
      h('button', { type: 'submit' }, 'Work it out'),
      out,
    );
    form.addEventListener('submit', async (ev) => {
      ev.preventDefault();
      const radius = numVal(form, 'fr_radius');
      const body = {
        as_found: numVal(form, 'fr_a0'),
        trial_mass_g: numVal(form, 'fr_mass'),
        angle_convention: val(form, 'fr_conv'),
        sensor: val(form, 'fr_sensor'),
        amp_unit: 'mm/s pk',
        ...(numVal(form, 'fr_speed') !== undefined ? { speed_rpm: numVal(form, 'fr_speed') } : {}),
        ...(radius !== undefined ? { radius_mm: radius } : {}),
        trials: [0, 1, 2].map((k) => ({
          angle_deg: numVal(form, `fr_t${k}`),
          amp: numVal(form, `fr_a${k + 1}`),
        })),
      };
      try {
        const r = await api.post('/api/tools/four-run', body);
        const issues = (/** @type {{message: string, hint: string}[]} */ list) =>
          list.length
            ? h(
                'ul',
                null,
                list.map((i) => h('li', null, `${i.message} \u2192 ${i.hint}`)),
              )
            : null;
        const cautions = h(
          'div',
          { class: 'cautions' },
          h('h3', null, 'SAFETY'),
          h(
            'ul',
            null,
            r.cautions.map((/** @type {string} */ c) => h('li', null, c)),
          ),
        );
        if (!r.ok) {
          fill(
            out,
            h(
              'div',
              { class: 'msg msg-error', role: 'alert', dataset: { ok: 'false' } },
              h('strong', null, 'No correction given: the readings do not fix the weight.'),
              issues(r.problems),
            ),
            issues(r.warnings),
            cautions,
          );
          return;
        }
        const c = r.correction;
        const u = r.correction_uncertainty;
        fill(
          out,
          h(
            'p',
            {
              class: 'fourrun-answer',
              dataset: { ok: 'true', mass: String(c.mass_g), angle: String(c.angle_deg) },
            },
            h(
              'strong',
              null,
              `Fit ${num(c.mass_g, 1)} g (\u00b1 ${num(u.mass_g, 1)}) at ` +
                `${deg(c.angle_deg)} (\u00b1 ${num(u.angle_deg, 1)} deg), ` +
                `${r.angle_convention === 'against_rotation' ? 'against' : 'with'} rotation ` +
                `from the reference mark`,
            ),
            `, with the trial weight ` +
              `removed${c.force_n !== undefined ? `: ${num(c.force_n, 0)} N at speed` : ''}. ` +
              `Trial effect ${num(r.trial_effect.amp, 2)} mm/s pk ` +
              `(${num(r.trial_effect.pct_of_as_found, 0)} % of as found); the circles ` +
              `miss one point by ${num(r.fit_residual.rms_amp, 2)} mm/s pk r.m.s. ` +
              `(${num(r.fit_residual.pct_of_as_found, 1)} %). Then do a check run.`,
          ),
          issues(r.warnings),
          cautions,
        );
      } catch (e) {
        fill(out, errorBox(e));
      }
    });
    return form;
  }
}

/** @param {FittedWeight} w */
export function weightText(w) {
  return (
    `${w.id}: ${num(w.mass_g, 1)} g at ${deg(w.angle_deg)} in ` +
    `${w.plane}, radius ${num(w.radius_mm, 0)} mm`
  );
}
