import { Finding, pct, type Reading, type WatcherRule } from './types.js';

/** Orders 2 and up (blade-pass multiples left out) and half orders at or above `ratio` x 1x. */
function harmonicsAbove(r: Reading, ratio: number, blades: number | null): string[] {
  const found: string[] = [];
  for (const [key, v] of Object.entries(r.c.orders)) {
    const k = Number(key);
    if (k < 2 || (blades !== null && k % blades === 0)) continue;
    if (v.amp_rms_mm_s >= ratio * r.amp) found.push(`${k}x`);
  }
  for (const p of r.c.nonsync_peaks) {
    const frac = p.order - Math.floor(p.order);
    if (Math.abs(frac - 0.5) < 0.05 && p.amp_rms_mm_s >= ratio * r.amp)
      found.push(`${p.order.toFixed(1)}x`);
  }
  return found;
}

/**
 * 2x and higher orders are small with unbalance (common practice). High 2x points to misalignment;
 * three or more harmonics or half orders above watcher.unbalance.harmonic_ratio point to looseness.
 */
export const harmonics: WatcherRule = {
  name: 'harmonics',
  summary:
    '2x/1x at or above watcher.unbalance.two_x_ratio_max points to misalignment; ' +
    '3 or more harmonics above harmonic_ratio to looseness (common practice)',
  run({ s, readings, main, maxRadial, measures }) {
    const u = s.w.unbalance;
    const f = new Finding();
    const significant = readings.filter((r) => r.amp >= 0.25 * maxRadial!.amp);
    const twoX = significant.flatMap((r) =>
      r.c.orders['2'] ? [{ r, ratio: r.c.orders['2'].amp_rms_mm_s / r.amp }] : [],
    );
    if (twoX.length === 0) {
      f.limits.push('no 2x vectors: the 2x rule was not checked');
      f.missing += 1;
    } else {
      const worst = twoX.reduce((a, b) => (b.ratio > a.ratio ? b : a));
      measures.two_x_over_one_x = worst.ratio;
      if (worst.ratio >= u.two_x_ratio_max) {
        f.facts.two_x_high = true;
        f.point(['misalignment'], `2x is ${pct(worst.ratio)} of 1x at ${worst.r.id} (high 2x)`);
        f.evidence.push(
          `2x is ${pct(worst.ratio)} of 1x at ${worst.r.id}: high 2x points to misalignment`,
        );
      } else f.evidence.push(`2x is at most ${pct(worst.ratio)} of 1x: small, as with unbalance`);
    }
    for (const r of main) {
      const h = harmonicsAbove(r, u.harmonic_ratio, s.blades);
      if (h.length >= 3) {
        f.point(
          ['looseness'],
          `${h.join(', ')} all above ${pct(u.harmonic_ratio)} of 1x at ${r.id} (many harmonics)`,
        );
        f.evidence.push(
          `${r.id} shows ${h.length} harmonics or half orders above ` +
            `${pct(u.harmonic_ratio)} of 1x (${h.join(', ')}): points to looseness`,
        );
      }
    }
    return f.done();
  },
};
