/** Display units for people; JSON always carries mm/s in fields named _mm_s. */
export type DisplayUnits = 'mm/s' | 'in/s';

export const MM_PER_INCH = 25.4;

export function toDisplay(mmPerS: number, units: DisplayUnits): number {
  return units === 'in/s' ? mmPerS / MM_PER_INCH : mmPerS;
}

/** Formats a velocity for a table: 2 decimals in mm/s, 3 in in/s. */
export function fmtVel(mmPerS: number | null | undefined, units: DisplayUnits): string {
  if (mmPerS == null || !Number.isFinite(mmPerS)) return '-';
  return toDisplay(mmPerS, units).toFixed(units === 'in/s' ? 3 : 2);
}

/**
 * Rounds to a number of decimals for JSON output (keeps JSON readable, far finer than the
 * accuracy).
 */
export function round(x: number | null | undefined, decimals: number): number | null {
  if (x == null || !Number.isFinite(x)) return null;
  const f = 10 ** decimals;
  return Math.round(x * f) / f;
}

/** Renders rows as a left-aligned text table with a header rule. */
export function table(header: readonly string[], rows: readonly (readonly string[])[]): string {
  const w = header.map((h, i) => Math.max(h.length, ...rows.map((r) => (r[i] ?? '').length)));
  const line = (r: readonly string[]) =>
    r
      .map((c, i) => (i === 0 ? c.padEnd(w[i]!) : c.padStart(w[i]!)))
      .join('  ')
      .trimEnd();
  return [line(header), w.map((n) => '-'.repeat(n)).join('  '), ...rows.map(line)].join('\n');
}
