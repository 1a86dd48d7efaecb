// @ts-check
/**
 * The live page: asks for the token (kept in sessionStorage for this tab only), opens the
 * WebSocket, draws one card per sensor (1x vector on a polar plot with its trail, amplitude and
 * phase in large figures, overall, zone, OK) and the session trend, and routes to the balancing
 * workbench, the job records and the printable report.
 */
import { api, deg, fill, h, num, units, vel } from './format.js';
import { PolarPlot } from './polar.js';
import { Trend } from './trend.js';
import { Workbench } from './workbench.js';
import { showRecords, showReport } from './report.js';
import { SweepsView } from './sweeps.js';

// The server's own types: the page is checked against what agent/live/view.ts sends.
/** @typedef {import('../view.js').SessionView} SessionView */
/** @typedef {import('../view.js').LiveSnapshot} LiveSnapshot */
/** @typedef {import('../view.js').PageMessage} PageMessage */
/** @typedef {import('../../balance/workbench/view.js').JobView} JobView */

const TOKEN_KEY = 'turnwise.token';
const $ = (/** @type {string} */ id) => /** @type {HTMLElement} */ (document.getElementById(id));

/** @type {SessionView | null} */
let session = null;
/** @type {WebSocket | null} */
let socket = null;
let lastLiveAt = 0;
/** @type {LiveSnapshot | null} */
let lastLive = null;
/** @type {Map<string, { card: HTMLElement, plot: PolarPlot, amp: HTMLElement, phase: HTMLElement, overall: HTMLElement, zone: HTMLElement, ok: HTMLElement, problems: HTMLElement }>} */
const cards = new Map();
/** @type {Trend | null} */
let trend = null;
/** @type {Workbench | null} */
let workbench = null;
/** @type {SweepsView | null} */
let sweeps = null;
let reconnectMs = 1000;

function showLogin(message = '') {
  sessionStorage.removeItem(TOKEN_KEY);
  socket?.close();
  socket = null;
  for (const id of ['view-live', 'view-job', 'view-records', 'view-report', 'view-sweeps'])
    $(id).hidden = true;
  $('login').hidden = false;
  fill(
    $('login-msg'),
    message ? h('div', { class: 'msg msg-error', role: 'alert' }, message) : null,
  );
  /** @type {HTMLInputElement} */ ($('token')).focus();
}

async function start(token) {
  api.token = token;
  /** @type {SessionView} */
  let me;
  try {
    me = await api.get('/api/session');
  } catch (e) {
    showLogin(
      /** @type {any} */ (e).status === 401
        ? 'That token was not accepted. Check it and try again.'
        : `Cannot reach the agent: ${/** @type {any} */ (e).message}`,
    );
    return;
  }
  session = me;
  sessionStorage.setItem(TOKEN_KEY, token);
  units.velocity = me.units;
  $('login').hidden = true;
  $('machine').textContent = me.machine_name;
  $('role').textContent =
    `${me.token_name} (${me.role === 'operator' ? 'operator' : 'viewer: read only'})`;
  buildCards(me);
  if (!trend)
    trend = new Trend(
      $('trend'),
      me.sensors.map((s) => s.id),
    );
  workbench ??= new Workbench($('view-job'), me, () => lastLive);
  sweeps ??= new SweepsView($('view-sweeps'), me.sensors);
  connect();
  route();
}

/** @param {SessionView} me */
function buildCards(me) {
  const root = $('cards');
  root.replaceChildren();
  cards.clear();
  for (const s of me.sensors) {
    const canvas = /** @type {HTMLCanvasElement} */ (
      h('canvas', { width: 200, height: 200, 'aria-label': `1x vector of ${s.id}` })
    );
    const amp = h('span', { class: 'big' }, '-');
    const phase = h('span', { class: 'big' }, '-');
    const overall = h('span', { class: 'big' }, '-');
    const zone = h('span', { class: 'zone zone-none' }, '-');
    const ok = h('span', { class: 'okbadge ok-unknown' }, '?');
    const problems = h('p', { class: 'problems', hidden: true });
    const card = h(
      'article',
      { class: 'card', dataset: { sensor: s.id } },
      h(
        'div',
        { class: 'card-head' },
        h(
          'div',
          null,
          h('div', { class: 'card-name' }, s.id),
          h('div', { class: 'card-where' }, `${s.bearing} bearing, ${s.direction}`),
        ),
        ok,
      ),
      h(
        'div',
        { class: 'card-body' },
        canvas,
        h(
          'div',
          { class: 'figs' },
          h(
            'div',
            { class: 'row' },
            h('span', { class: 'lbl' }, '1x amplitude'),
            amp,
            ' ',
            h('span', { class: 'unit' }, `${units.velocity} pk`),
          ),
          h('div', { class: 'row' }, h('span', { class: 'lbl' }, '1x phase (lag)'), phase),
          h(
            'div',
            { class: 'row' },
            h('span', { class: 'lbl' }, 'overall'),
            overall,
            ' ',
            h('span', { class: 'unit' }, `${units.velocity} r.m.s.`),
            ' ',
            zone,
          ),
        ),
      ),
      problems,
    );
    root.append(card);
    cards.set(s.id, { card, plot: new PolarPlot(canvas), amp, phase, overall, zone, ok, problems });
  }
}

/** @param {LiveSnapshot} live */
function renderLive(live) {
  lastLive = live;
  lastLiveAt = Date.now();
  $('speed').textContent = live.speed_rpm === null ? '-' : num(live.speed_rpm, 0);
  const mz = live.machine_zone;
  const z = $('machine-zone');
  z.textContent = mz && mz !== 'unknown' ? `zone ${mz}` : '-';
  z.className = `zone ${mz && mz !== 'unknown' ? `zone-${mz}` : 'zone-none'}`;
  const conv = (/** @type {number} */ x) => (units.velocity === 'in/s' ? x / 25.4 : x);
  for (const c of live.channels) {
    const el = cards.get(c.id);
    if (!el) continue;
    el.amp.textContent = c.one_x ? vel(c.one_x.amp_pk_mm_s) : '-';
    el.phase.textContent = c.one_x ? deg(c.one_x.phase_deg) : '-';
    el.overall.textContent = vel(c.overall_rms_mm_s);
    el.zone.textContent = c.zone ? `zone ${c.zone}` : 'zone -';
    el.zone.className = `zone ${c.zone ? `zone-${c.zone}` : 'zone-none'}`;
    el.ok.textContent = c.ok === null ? 'not checked yet' : c.ok ? 'OK' : 'NOT OK';
    el.ok.className = `okbadge ${c.ok === null ? 'ok-unknown' : c.ok ? 'ok-yes' : 'ok-no'}`;
    el.card.classList.toggle('notok', c.ok === false);
    el.problems.hidden = !(c.problems && c.problems.length);
    el.problems.textContent = (c.problems ?? []).join('; ');
    el.card.dataset.amp = c.one_x ? String(c.one_x.amp_pk_mm_s) : '';
    el.card.dataset.phase = c.one_x ? String(c.one_x.phase_deg) : '';
    el.card.dataset.atMs = String(live.at_ms ?? '');
    const pv = (/** @type {any} */ v) => ({ amp: conv(v.amp_pk_mm_s), phase_deg: v.phase_deg });
    el.plot.draw(c.one_x ? pv(c.one_x) : null, c.trail.map(pv), `${units.velocity}`);
  }
  renderForecast(live.forecast);
  checkStale();
}

/** The forecast now on the page (JSON), so a new one is drawn only when it changed. */
let shownForecast = '';

/**
 * The watcher's balance forecast: the weight a crew could prepare before the next stop, with the
 * job it comes from, the angle convention and the cautions. Hidden while no coefficients are
 * stored.
 * @param {any} f
 */
function renderForecast(f) {
  const box = $('forecast');
  box.hidden = !f;
  const key = JSON.stringify(f);
  if (!f || key === shownForecast) return;
  shownForecast = key;
  const conv = f.angle_convention === 'with_rotation' ? 'WITH rotation' : 'AGAINST rotation';
  fill(
    box,
    h('h2', null, 'Correction forecast'),
    f.available
      ? [
          h(
            'div',
            { class: 'conv-banner' },
            `Weight angles in degrees from the reference ` +
              `mark, measured ${conv} (as in job ${f.job_id}).`,
          ),
          h(
            'table',
            { class: 'forecast-weights' },
            h(
              'thead',
              null,
              h(
                'tr',
                null,
                h('th', null, 'plane'),
                h('th', null, 'mass, g'),
                h('th', null, 'angle, deg'),
                h('th', null, 'radius, mm'),
              ),
            ),
            h(
              'tbody',
              null,
              ...f.weights.map((/** @type {any} */ w) =>
                h(
                  'tr',
                  {
                    dataset: {
                      plane: w.plane,
                      massG: String(w.mass_g),
                      angleDeg: String(w.angle_deg),
                      radiusMm: String(w.radius_mm ?? ''),
                    },
                  },
                  h('td', null, w.plane),
                  h('td', { class: 'big' }, num(w.mass_g, 1)),
                  h('td', { class: 'big' }, deg(w.angle_deg)),
                  h('td', null, w.radius_mm === null ? 'as in the job' : num(w.radius_mm, 0)),
                ),
              ),
            ),
          ),
          h(
            'p',
            { class: 'note' },
            `${f.why}. Predicted 1x left after it: ${vel(f.residual_pk_mm_s)} ` +
              `${units.velocity} pk (r.m.s. over ${f.sensors_used.length} sensors).`,
          ),
          ...f.notes.map((/** @type {string} */ n) => h('p', { class: 'msg msg-warn' }, n)),
        ]
      : h('p', { class: 'note' }, `No forecast: ${f.why}.`),
    h(
      'ul',
      { class: 'cautions' },
      ...f.cautions.map((/** @type {string} */ c) => h('li', null, c)),
    ),
  );
}

function checkStale() {
  const box = $('stale');
  const quiet = lastLiveAt ? (Date.now() - lastLiveAt) / 1000 : null;
  let text = '';
  if (!socket || socket.readyState !== WebSocket.OPEN)
    text = 'NOT CONNECTED to the agent: the figures below are old.';
  else if (quiet !== null && quiet > 3)
    text = `NO LIVE DATA for ${Math.round(quiet)} s: the figures below are old.`;
  else if (lastLive && lastLive.age_s !== null && lastLive.age_s > 3)
    text =
      `No trusted revolution for ${Math.round(lastLive.age_s)} s: ` +
      `fan stopped or tach lost. 1x figures are old.`;
  else if (lastLive && lastLive.at_ms === null) text = 'Waiting for the first measurement.';
  box.hidden = !text;
  box.textContent = text;
  const link = $('link');
  const up = !!socket && socket.readyState === WebSocket.OPEN && !text;
  link.textContent = up ? 'live' : 'not live';
  link.className = `link ${up ? 'link-up' : 'link-down'}`;
}

function connect() {
  const ws = new WebSocket(
    `${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/ws`,
  );
  socket = ws;
  ws.onopen = () => ws.send(JSON.stringify({ type: 'hello', token: api.token }));
  ws.onmessage = (ev) => {
    /** @type {PageMessage} */
    const m = JSON.parse(String(ev.data));
    if (m.type === 'welcome') {
      reconnectMs = 1000;
      session = m.session;
    } else if (m.type === 'live') renderLive(m.live);
    else if (m.type === 'trend') trend?.set(m.points);
    else if (m.type === 'trend_point') trend?.add(m.point);
    else if (m.type === 'sweep_live') sweeps?.onLive(m.sweep);
    else if (m.type === 'sweep_recorded') void sweeps?.onRecorded(m.sweep);
    else if (m.type === 'job') {
      workbench?.update(m.view);
      jobNote(m.view);
    }
  };
  ws.onclose = (ev) => {
    if (socket !== ws) return;
    socket = null;
    checkStale();
    if (ev.code === 4401) return showLogin('The token is no longer accepted. Enter it again.');
    setTimeout(() => {
      if (!socket && api.token) connect();
    }, reconnectMs);
    reconnectMs = Math.min(reconnectMs * 2, 15000);
  };
}

/** The open job's angle convention, shown on the live screen too. @param {JobView | null} view */
function jobNote(view) {
  const el = $('job-note');
  el.hidden = !view || view.job.status !== 'open';
  if (view)
    el.textContent = `Balancing job ${view.job.job_id} is open. Conventions: ${view.convention}.`;
}

function route() {
  if (!session) return;
  const hash = location.hash.replace(/^#/, '') || 'live';
  const [page, arg] = hash.split('/');
  const views = {
    live: 'view-live',
    job: 'view-job',
    records: 'view-records',
    report: 'view-report',
    sweeps: 'view-sweeps',
  };
  const current = /** @type {keyof typeof views} */ (page && page in views ? page : 'live');
  for (const [k, id] of Object.entries(views)) $(id).hidden = k !== current;
  document
    .querySelectorAll('nav a')
    .forEach((a) =>
      a.classList.toggle(
        'active',
        /** @type {HTMLElement} */ (a).dataset.nav === (current === 'report' ? 'records' : current),
      ),
    );
  if (current === 'records') void showRecords($('view-records'));
  if (current === 'report' && arg)
    void showReport($('view-report'), decodeURIComponent(arg), session);
  if (current === 'job') workbench?.show();
  if (current === 'sweeps') void sweeps?.load();
  if (current === 'live') lastLive && renderLive(lastLive);
}

window.addEventListener('hashchange', route);
setInterval(checkStale, 1000);
api.onUnauthorised = () => showLogin('The token is no longer accepted. Enter it again.');
$('login-form').addEventListener('submit', (ev) => {
  ev.preventDefault();
  const t = /** @type {HTMLInputElement} */ ($('token')).value.trim();
  /** @type {HTMLInputElement} */ ($('token')).value = '';
  void start(t);
});
const saved = sessionStorage.getItem(TOKEN_KEY);
if (saved) void start(saved);
else showLogin();
