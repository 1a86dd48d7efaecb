// @ts-check
/**
 * Run-ups and coast-downs on the page: a Bode plot (1x amplitude and phase against speed, uPlot)
 * and a polar plot of the 1x vector along the sweep (own canvas drawing: 0 degrees at the top,
 * phase lag clockwise, as on the vector cards) for one sensor at a time; the resonances found are
 * marked, earlier sweeps drawn beside the newest for comparison, and a sweep going on now grows on
 * the plots as its points arrive over the WebSocket. Below: the event captures, for download.
 */
import { api, fill, h, num, units } from './format.js';

/** Newest first; the page overlays the ones ticked. */
const COLOURS = ['#b3001b', '#003a8c', '#0b6e2f', '#7a3e00', '#6a1b9a', '#00695c'];
const LIVE_COLOUR = '#c25e00';

/**
 * @typedef {{ rpm: number, amp_pk_mm_s: number, phase_deg: number }} Pt
 * @typedef {{ id: string, label: string, points: Pt[], resonances: { rpm: number }[] }} Curve
 */

export class SweepsView {
  /** @param {HTMLElement} root @param {readonly { id: string }[]} sensors */
  constructor(root, sensors) {
    this.root = root;
    this.sensors = sensors.map((s) => s.id);
    this.sensor = this.sensors.find((s) => /-H$/.test(s)) ?? this.sensors[0] ?? '';
    /** @type {any[]} */
    this.list = [];
    /** @type {Map<string, any>} */
    this.full = new Map();
    /** @type {Set<string>} */
    this.ticked = new Set();
    /** @type {any} */
    this.live = null;
    /** @type {any[]} */
    this.plots = [];
    this.status = h(
      'p',
      { class: 'note', id: 'sweep-status' },
      'No run-up or coast-down recorded yet.',
    );
    this.select = /** @type {HTMLSelectElement} */ (
      h(
        'select',
        { id: 'sweep-sensor', 'aria-label': 'sensor' },
        ...this.sensors.map((s) => h('option', { value: s }, s)),
      )
    );
    this.select.value = this.sensor;
    this.select.onchange = () => {
      this.sensor = this.select.value;
      this.draw();
    };
    this.bode = h('div', { class: 'bode', id: 'bode' });
    this.polar = /** @type {HTMLCanvasElement} */ (
      h('canvas', {
        id: 'sweep-polar',
        class: 'sweep-polar',
        'aria-label': '1x vector along the sweep',
      })
    );
    this.listBox = h('div', { id: 'sweep-list' });
    this.captures = h('div', { id: 'capture-list' });
    root.append(
      h('h2', null, 'Run-ups and coast-downs'),
      h(
        'p',
        { class: 'legend' },
        'Bode plot: 1x amplitude and phase lag against speed. Polar plot: the ' +
          '1x vector along the sweep, 0° at the top, lag clockwise. Rings mark ' +
          'the resonances found (amplitude peak with the phase swing through it).',
      ),
      h(
        'div',
        { class: 'sweep-controls' },
        h('label', { for: 'sweep-sensor' }, 'Sensor '),
        this.select,
      ),
      this.status,
      this.bode,
      this.polar,
      h('h3', null, 'Recorded sweeps (tick to compare)'),
      this.listBox,
      h('h2', null, 'Event captures'),
      h(
        'p',
        { class: 'legend' },
        'Raw samples of every channel around each alarm. The .wav opens ' +
          'with turnwise analyze or sweep, using the .yaml beside it.',
      ),
      this.captures,
    );
    new ResizeObserver(() => this.draw()).observe(root);
  }

  async load() {
    try {
      const [{ sweeps }, { captures }, { sweep }] = await Promise.all([
        api.get('/api/sweeps'),
        api.get('/api/captures'),
        api.get('/api/sweeps/live'),
      ]);
      this.list = sweeps;
      this.live = sweep;
      if (this.ticked.size === 0) {
        // The newest, and the reference of its direction, for comparison.
        const newest = sweeps[0];
        if (newest) this.ticked.add(newest.id);
        const ref =
          newest &&
          sweeps.find((/** @type {any} */ s) => s.reference && s.direction === newest.direction);
        if (ref) this.ticked.add(ref.id);
      }
      await this.fetchTicked();
      this.renderList();
      this.renderCaptures(captures);
      this.draw();
    } catch (e) {
      fill(
        this.status,
        h(
          'span',
          { class: 'msg msg-error' },
          `Cannot load the sweeps: ${/** @type {any} */ (e).message}`,
        ),
      );
    }
  }

  async fetchTicked() {
    for (const id of this.ticked)
      if (!this.full.has(id))
        this.full.set(id, await api.get(`/api/sweeps/${encodeURIComponent(id)}`));
  }

  /** A point of the sweep going on now (or null when it has ended). @param {any} sweep */
  onLive(sweep) {
    this.live = sweep;
    this.draw();
  }

  /** @param {any} summary */
  async onRecorded(summary) {
    this.list = [summary, ...this.list.filter((s) => s.id !== summary.id)];
    this.ticked.add(summary.id);
    await this.fetchTicked();
    this.renderList();
    this.draw();
  }

  renderList() {
    fill(
      this.listBox,
      this.list.length === 0
        ? h('p', { class: 'note' }, 'None yet: turnwise run records every run-up and coast-down.')
        : h(
            'ul',
            { class: 'sweep-list' },
            ...this.list.map((s) => {
              const box = /** @type {HTMLInputElement} */ (
                h('input', { type: 'checkbox', id: `tick-${s.id}` })
              );
              box.checked = this.ticked.has(s.id);
              box.onchange = async () => {
                if (box.checked) this.ticked.add(s.id);
                else this.ticked.delete(s.id);
                await this.fetchTicked();
                this.draw();
              };
              const res = s.resonances.filter((/** @type {any} */ r) => r.sensor === this.sensor);
              return h(
                'li',
                { dataset: { sweep: s.id } },
                box,
                h(
                  'label',
                  { for: `tick-${s.id}` },
                  `${s.ts.slice(0, 16).replace('T', ' ')} ` +
                    `${s.direction === 'up' ? 'run-up' : 'coast-down'} ` +
                    `${num(s.from_rpm, 0)}-${num(s.to_rpm, 0)} ` +
                    `r/min${s.reference ? ' (reference)' : ''}`,
                ),
                h(
                  'span',
                  { class: 'note' },
                  res.length
                    ? ` resonance ` +
                        `${res.map((/** @type {any} */ r) => `${num(r.rpm, 0)} r/min, AF ${num(r.amplification_factor, 1)}${r.margin_ok === false ? ' TOO CLOSE to running speed' : ''}`).join('; ')}`
                    : '',
                ),
              );
            }),
          ),
    );
  }

  /** @param {any[]} captures */
  renderCaptures(captures) {
    fill(
      this.captures,
      captures.length === 0
        ? h(
            'p',
            { class: 'note' },
            'No capture yet: one is written at every alarm (and on the capture.take command).',
          )
        : h(
            'ul',
            { class: 'capture-list' },
            ...captures.map((c) =>
              h(
                'li',
                { dataset: { capture: c.id } },
                h('span', null, `${c.ts.slice(0, 19).replace('T', ' ')} ${c.reason} `),
                ...['wav', 'yaml', 'json'].map((ext) => {
                  const b = h(
                    'button',
                    { type: 'button', class: 'small', dataset: { ext } },
                    `.${ext}`,
                  );
                  b.onclick = () => void download(`/api/captures/${c.id}/${ext}`, `${c.id}.${ext}`);
                  return b;
                }),
              ),
            ),
          ),
    );
  }

  /**
   * The curves to draw for the chosen sensor: the ticked sweeps, oldest first, then the live one.
   * @returns {Curve[]}
   */
  curves() {
    /** @type {Curve[]} */
    const out = [];
    for (const s of [...this.list].reverse()) {
      if (!this.ticked.has(s.id)) continue;
      const f = this.full.get(s.id);
      const ch = f?.channels.find((/** @type {any} */ c) => c.id === this.sensor);
      if (!ch) continue;
      out.push({
        id: s.id,
        label: `${s.ts.slice(5, 16).replace('T', ' ')} ${s.direction}${s.reference ? ' ref' : ''}`,
        points: ch.points,
        resonances: ch.resonances,
      });
    }
    const k = this.sensors.indexOf(this.sensor);
    if (this.live && k >= 0)
      out.push({
        id: 'live',
        label: `now (${this.live.direction === 'up' ? 'run-up' : 'coast-down'})`,
        points: this.live.points.map((/** @type {any} */ p) => ({
          rpm: p.rpm,
          amp_pk_mm_s: p.amp_pk_mm_s[k],
          phase_deg: p.phase_deg[k],
        })),
        resonances: [],
      });
    return out;
  }

  draw() {
    if (this.root.clientWidth === 0) return;
    const curves = this.curves();
    this.status.textContent = this.live
      ? `${this.live.direction === 'up' ? 'Run-up' : 'Coast-down'} going ` +
        `on: ${this.live.points.length} points so far.`
      : curves.length
        ? `${this.sensor}: ${curves.length} sweep(s) shown.`
        : 'No run-up or coast-down to show yet.';
    this.drawBode(curves);
    drawPolar(this.polar, curves, Math.min(this.root.clientWidth - 4, 420));
  }

  /** @param {Curve[]} curves */
  drawBode(curves) {
    const U = /** @type {any} */ (window).uPlot;
    for (const p of this.plots) p.destroy();
    this.plots = [];
    this.bode.replaceChildren();
    if (!U || curves.length === 0) return;
    const conv = (/** @type {number} */ x) => (units.velocity === 'in/s' ? x / 25.4 : x);
    // One x (speed) for all curves: uPlot.join aligns them, missing points are gaps.
    const tables = curves.map((c) => {
      const pts = [...c.points].sort((a, b) => a.rpm - b.rpm);
      return [
        pts.map((p) => p.rpm),
        pts.map((p) => conv(p.amp_pk_mm_s)),
        pts.map((p) => p.phase_deg),
      ];
    });
    const ampData = U.join(tables.map((t) => [t[0], t[1]]));
    const phaseData = U.join(tables.map((t) => [t[0], t[2]]));
    const width = Math.max(260, Math.min(this.root.clientWidth - 4, 1000));
    const colour = (/** @type {number} */ i) =>
      curves[i]?.id === 'live' ? LIVE_COLOUR : COLOURS[(curves.length - 1 - i) % COLOURS.length];
    const marks = (/** @type {any} */ u) => {
      const ctx = u.ctx;
      curves.forEach((c, i) => {
        for (const r of c.resonances) {
          const x = u.valToPos(r.rpm, 'x', true);
          ctx.save();
          ctx.strokeStyle = colour(i);
          ctx.setLineDash([6, 4]);
          ctx.lineWidth = 2;
          ctx.beginPath();
          ctx.moveTo(x, u.bbox.top);
          ctx.lineTo(x, u.bbox.top + u.bbox.height);
          ctx.stroke();
          ctx.restore();
        }
      });
    };
    /** @param {string} title @param {any} data @param {any} yScale */
    const plot = (title, data, yScale) => {
      const box = h(
        'div',
        { class: 'trend-plot bode-plot', dataset: { plot: title } },
        h('h3', null, title),
      );
      this.bode.append(box);
      const opts = {
        width,
        height: 200,
        scales: { x: { time: false }, y: yScale },
        axes: [
          {
            stroke: '#000',
            grid: { stroke: '#c8c8c8' },
            font: 'bold 12px system-ui, sans-serif',
            label: 'r/min',
            labelSize: 18,
          },
          {
            stroke: '#000',
            grid: { stroke: '#c8c8c8' },
            font: 'bold 12px system-ui, sans-serif',
            size: 48,
          },
        ],
        legend: { live: false },
        series: [
          {},
          ...curves.map((c, i) => ({
            label: c.label,
            stroke: colour(i),
            width: c.id === 'live' ? 3 : 2,
            spanGaps: true,
          })),
        ],
        hooks: { draw: [marks] },
      };
      this.plots.push(new U(opts, data, box));
    };
    plot(`1x amplitude, ${units.velocity} pk`, ampData, { auto: true });
    plot('1x phase lag, degrees', phaseData, { auto: false, range: [0, 360] });
  }
}

/**
 * The 1x vector along each sweep: a path from the first point to the last, a ring at each
 * resonance, the speed written at both ends.
 * @param {HTMLCanvasElement} c @param {Curve[]} curves @param {number} css
 */
function drawPolar(c, curves, css) {
  const dpr = window.devicePixelRatio || 1;
  c.style.width = `${css}px`;
  c.style.height = `${css}px`;
  c.width = Math.round(css * dpr);
  c.height = Math.round(css * dpr);
  const ctx = /** @type {CanvasRenderingContext2D} */ (c.getContext('2d'));
  ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
  ctx.clearRect(0, 0, css, css);
  const mid = css / 2;
  const R = mid - 30;
  const conv = (/** @type {number} */ x) => (units.velocity === 'in/s' ? x / 25.4 : x);
  const max =
    curves.reduce(
      (m, cv) => cv.points.reduce((mm, p) => Math.max(mm, conv(p.amp_pk_mm_s)), m),
      0,
    ) || 1;
  const p10 = 10 ** Math.floor(Math.log10(max));
  const S = [1, 2, 2.5, 5, 10].map((n) => n * p10).find((v) => v >= max) ?? max;
  const at = (/** @type {number} */ amp, /** @type {number} */ ph) => {
    const r = (Math.min(conv(amp), S) / S) * R;
    const a = (ph * Math.PI) / 180;
    return [mid + r * Math.sin(a), mid - r * Math.cos(a)];
  };
  ctx.strokeStyle = '#c8c8c8';
  ctx.lineWidth = 1;
  for (let k = 1; k <= 4; k++) {
    ctx.beginPath();
    ctx.arc(mid, mid, (R * k) / 4, 0, 2 * Math.PI);
    ctx.stroke();
  }
  ctx.fillStyle = '#000';
  ctx.font = 'bold 12px system-ui, sans-serif';
  ctx.textAlign = 'center';
  for (const d of [0, 90, 180, 270]) {
    const [x, y] = at(S * 1.12 * (S > 0 ? 1 : 0), d);
    ctx.fillText(`${d}°`, x, y + 4);
  }
  ctx.textAlign = 'left';
  ctx.fillText(`${num(S, S < 1 ? 2 : 1)} ${units.velocity} pk`, 4, 14);
  curves.forEach((cv, i) => {
    if (cv.points.length === 0) return;
    const colour =
      cv.id === 'live' ? LIVE_COLOUR : COLOURS[(curves.length - 1 - i) % COLOURS.length];
    ctx.strokeStyle = colour;
    ctx.fillStyle = colour;
    ctx.lineWidth = cv.id === 'live' ? 3 : 2;
    ctx.beginPath();
    cv.points.forEach((p, k) => {
      const [x, y] = at(p.amp_pk_mm_s, p.phase_deg);
      if (k === 0) ctx.moveTo(x, y);
      else ctx.lineTo(x, y);
    });
    ctx.stroke();
    for (const r of cv.resonances) {
      const near = cv.points.reduce(
        (b, p) => (Math.abs(p.rpm - r.rpm) < Math.abs(b.rpm - r.rpm) ? p : b),
        cv.points[0],
      );
      const [x, y] = at(near.amp_pk_mm_s, near.phase_deg);
      ctx.beginPath();
      ctx.arc(x, y, 7, 0, 2 * Math.PI);
      ctx.stroke();
      ctx.fillText(`${num(r.rpm, 0)}`, x + 9, y - 6);
    }
    const last = cv.points[cv.points.length - 1];
    const [lx, ly] = at(last.amp_pk_mm_s, last.phase_deg);
    ctx.beginPath();
    ctx.arc(lx, ly, 4, 0, 2 * Math.PI);
    ctx.fill();
  });
}

/**
 * Fetches a file with the token and hands it to the browser as a download.
 * @param {string} path
 * @param {string} name
 */
async function download(path, name) {
  const res = await fetch(path, { headers: { Authorization: `Bearer ${api.token}` } });
  if (!res.ok) {
    alert(
      `Download failed (${res.status}): the capture may ` +
        `have been removed to keep within capture.max_count.`,
    );
    return;
  }
  const url = URL.createObjectURL(await res.blob());
  const a = h('a', { href: url, download: name });
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10_000);
}
