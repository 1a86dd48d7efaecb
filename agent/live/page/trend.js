// @ts-check
/**
 * Session trend with uPlot (served from the board, no CDN): 1x amplitude and overall velocity of
 * every sensor, one point per analysis window.
 */
import { h, units } from './format.js';

/** Distinct, dark colours that read on white in sunlight. */
export const SENSOR_COLOURS = [
  '#003a8c',
  '#b3001b',
  '#0b6e2f',
  '#7a3e00',
  '#6a1b9a',
  '#00695c',
  '#000000',
  '#c25e00',
];

/** @typedef {import('../view.js').TrendPoint} TrendPoint */

export class Trend {
  /** @param {HTMLElement} root @param {string[]} sensors */
  constructor(root, sensors) {
    this.root = root;
    this.sensors = sensors;
    /** @type {TrendPoint[]} */
    this.points = [];
    /** @type {any[]} */
    this.plots = [];
    const U = /** @type {any} */ (window).uPlot;
    if (!U) {
      root.append(h('p', { class: 'msg msg-error' }, 'The trend plot library did not load.'));
      return;
    }
    const conv = (/** @type {number | null} */ x) =>
      x === null ? null : units.velocity === 'in/s' ? x / 25.4 : x;
    /** @type {Array<[string, string, (c: TrendPoint['channels'][string] | undefined) => number | null]>} */
    const kinds = [
      ['1x amplitude', `${units.velocity} pk`, (c) => conv(c?.one_x_pk_mm_s ?? null)],
      ['Overall', `${units.velocity} r.m.s.`, (c) => conv(c?.overall_rms_mm_s ?? null)],
    ];
    this.kinds = kinds;
    kinds.forEach(([title, unit], k) => {
      const box = h('div', { class: 'trend-plot' }, h('h3', null, `${title} (${unit})`));
      root.append(box);
      const opts = {
        width: this.width(),
        height: 220,
        scales: { x: { time: true } },
        axes: [
          { stroke: '#000', grid: { stroke: '#c8c8c8' }, font: 'bold 13px system-ui, sans-serif' },
          {
            stroke: '#000',
            grid: { stroke: '#c8c8c8' },
            font: 'bold 13px system-ui, sans-serif',
            size: 56,
          },
        ],
        legend: { live: false },
        series: [
          {},
          ...sensors.map((id, i) => ({
            label: id,
            stroke: SENSOR_COLOURS[i % SENSOR_COLOURS.length],
            width: 2.5,
            spanGaps: false,
          })),
        ],
      };
      this.plots.push(new U(opts, this.data(k), box));
    });
    // The charts follow their box: the window's width, a phone turned, the view shown after being
    // hidden (a hidden box is 0 px wide and is left alone until it is shown).
    this.drawnWidth = this.width();
    new ResizeObserver(() => this.resize()).observe(root);
  }

  /** The chart width that fits the plot box (inside its border and padding), CSS px. */
  width() {
    const box = /** @type {HTMLElement | null} */ (this.root.querySelector('.trend-plot'));
    if (!box || box.clientWidth === 0) return 280;
    const cs = getComputedStyle(box);
    const inner = box.clientWidth - parseFloat(cs.paddingLeft) - parseFloat(cs.paddingRight);
    return Math.max(200, Math.min(Math.floor(inner), 1400));
  }

  resize() {
    if (this.root.clientWidth === 0) return;
    const width = this.width();
    if (width === this.drawnWidth) return;
    this.drawnWidth = width;
    this.plots.forEach((p) => p.setSize({ width, height: 220 }));
  }

  /** @param {number} k */
  data(k) {
    const xs = this.points.map((p) => p.t_ms / 1000);
    const f = /** @type {any[]} */ (this.kinds)[k][2];
    return [xs, ...this.sensors.map((id) => this.points.map((p) => f(p.channels[id])))];
  }

  /** @param {readonly TrendPoint[]} points */
  set(points) {
    this.points = points.slice();
    this.redraw();
  }

  /** @param {TrendPoint} point */
  add(point) {
    this.points.push(point);
    this.redraw();
  }

  redraw() {
    this.plots.forEach((p, k) => p.setData(this.data(k)));
  }
}
