// @ts-check
/**
 * The 1x vector on a polar plot, drawn on a canvas: 0 degrees at the top, phase lag increasing
 * clockwise, amplitude from the centre. The current vector is a thick arrow; earlier vectors are
 * dots that grow and darken towards the present, joined by a line, so a drifting phase shows as a
 * path. The scale grows at once and shrinks only when the vectors have stayed well inside it.
 */

const NICE = [1, 2, 2.5, 5];

/** Smallest "nice" number (1, 2, 2.5, 5 x 10^k) at or above x. @param {number} x */
function niceCeil(x) {
  if (!(x > 0)) return 1;
  const p = 10 ** Math.floor(Math.log10(x));
  for (const n of NICE) if (n * p >= x * 0.999) return n * p;
  return 10 * p;
}

/**
 * @typedef {{ amp: number, phase_deg: number }} PolarVector amplitude in display units, phase lag
 *   in degrees
 */

export class PolarPlot {
  /** @param {HTMLCanvasElement} canvas */
  constructor(canvas) {
    this.canvas = canvas;
    this.scale = 0;
  }

  /**
   * @param {PolarVector | null} current
   * @param {PolarVector[]} trail oldest first
   * @param {string} unitLabel
   */
  draw(current, trail, unitLabel) {
    const c = this.canvas;
    const dpr = window.devicePixelRatio || 1;
    const css = c.clientWidth || 220;
    if (c.width !== Math.round(css * dpr)) {
      c.width = Math.round(css * dpr);
      c.height = Math.round(css * dpr);
    }
    const ctx = /** @type {CanvasRenderingContext2D} */ (c.getContext('2d'));
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    const size = css;
    const mid = size / 2;
    const R = mid - 34;
    ctx.clearRect(0, 0, size, size);

    const all = [...trail, ...(current ? [current] : [])];
    const max = all.reduce((m, v) => Math.max(m, v.amp), 0);
    if (max > this.scale || max < 0.4 * this.scale || this.scale === 0)
      this.scale = niceCeil(max * 1.1 || 1);
    const S = this.scale;
    const at = (/** @type {PolarVector} */ v) => {
      const r = (Math.min(v.amp, S) / S) * R;
      const a = (v.phase_deg * Math.PI) / 180;
      return [mid + r * Math.sin(a), mid - r * Math.cos(a)];
    };

    // Rings and spokes.
    ctx.lineWidth = 1.5;
    ctx.strokeStyle = '#6b6b6b';
    for (let k = 1; k <= 4; k++) {
      ctx.beginPath();
      ctx.arc(mid, mid, (R * k) / 4, 0, 2 * Math.PI);
      ctx.stroke();
    }
    for (let a = 0; a < 360; a += 30) {
      const t = (a * Math.PI) / 180;
      ctx.beginPath();
      ctx.moveTo(mid, mid);
      ctx.lineTo(mid + R * Math.sin(t), mid - R * Math.cos(t));
      ctx.stroke();
    }
    ctx.fillStyle = '#000';
    ctx.font = 'bold 14px system-ui, sans-serif';
    ctx.textAlign = 'center';
    ctx.textBaseline = 'middle';
    for (const a of [0, 90, 180, 270]) {
      const t = (a * Math.PI) / 180;
      ctx.fillText(`${a}\u00b0`, mid + (R + 17) * Math.sin(t), mid - (R + 15) * Math.cos(t));
    }
    ctx.textAlign = 'left';
    ctx.font = 'bold 12px system-ui, sans-serif';
    ctx.fillText(`${S} ${unitLabel}`, mid + 4, mid - R + 10);

    // Trail.
    if (trail.length) {
      ctx.strokeStyle = 'rgba(0, 58, 140, 0.45)';
      ctx.lineWidth = 2;
      ctx.beginPath();
      all.forEach((v, i) => {
        const [x, y] = at(v);
        if (i === 0) ctx.moveTo(x, y);
        else ctx.lineTo(x, y);
      });
      ctx.stroke();
      trail.forEach((v, i) => {
        const f = (i + 1) / (trail.length + 1);
        const [x, y] = at(v);
        ctx.fillStyle = `rgba(0, 58, 140, ${0.3 + 0.5 * f})`;
        ctx.beginPath();
        ctx.arc(x, y, 2.5 + 2.5 * f, 0, 2 * Math.PI);
        ctx.fill();
      });
    }

    // Current vector.
    if (current) {
      const [x, y] = at(current);
      ctx.strokeStyle = '#003a8c';
      ctx.fillStyle = '#003a8c';
      ctx.lineWidth = 5;
      ctx.lineCap = 'round';
      ctx.beginPath();
      ctx.moveTo(mid, mid);
      ctx.lineTo(x, y);
      ctx.stroke();
      ctx.beginPath();
      ctx.arc(x, y, 8, 0, 2 * Math.PI);
      ctx.fill();
    } else {
      ctx.fillStyle = '#000';
      ctx.font = 'bold 16px system-ui, sans-serif';
      ctx.textAlign = 'center';
      ctx.fillText('no 1x vector', mid, mid);
    }
  }
}
