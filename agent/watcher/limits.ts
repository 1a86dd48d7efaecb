/**
 * Severity limits and zones. Zones apply to the broadband velocity r.m.s. on a bearing housing
 * (`ChannelResult.overall_rms_mm_s`), which is what ISO 20816-3 and ISO 14694 rate.
 *
 * A value on a boundary belongs to the zone below it (a boundary is the upper limit of its lower
 * zone).
 */

export type Zone = 'A' | 'B' | 'C' | 'D';
export const ZONES: readonly Zone[] = ['A', 'B', 'C', 'D'];

export interface Boundaries {
  /** Upper limit of zone A, mm/s r.m.s. */
  readonly ab_mm_s: number;
  /** Upper limit of zone B, mm/s r.m.s. */
  readonly bc_mm_s: number;
  /** Upper limit of zone C, mm/s r.m.s. */
  readonly cd_mm_s: number;
}

export interface Limits extends Boundaries {
  readonly source: 'iso20816' | 'iso14694' | 'custom';
  /** Where the numbers come from, in words, shown to people and put in events. */
  readonly basis: string;
}

/**
 * ISO 20816-3 (replaced ISO 10816-3), zone boundaries A/B, B/C, C/D in mm/s r.m.s. for
 * bearing-housing velocity, 10-1000 Hz (2-1000 Hz below 600 r/min). Group 1: over 300 kW; group 2:
 * 15-300 kW.
 */
export const ISO_20816_3: Readonly<
  Record<1 | 2, Readonly<Record<'rigid' | 'flexible', Boundaries>>>
> = {
  1: {
    rigid: { ab_mm_s: 2.3, bc_mm_s: 4.5, cd_mm_s: 7.1 },
    flexible: { ab_mm_s: 3.5, bc_mm_s: 7.1, cd_mm_s: 11.0 },
  },
  2: {
    rigid: { ab_mm_s: 1.4, bc_mm_s: 2.8, cd_mm_s: 4.5 },
    flexible: { ab_mm_s: 2.3, bc_mm_s: 4.5, cd_mm_s: 7.1 },
  },
};

export interface Iso14694Limits {
  readonly startup_mm_s: number;
  readonly alarm_mm_s: number;
  readonly shutdown_mm_s: number;
}

/**
 * ISO 14694 in-situ broadband limits for fans, mm/s r.m.s. Values from memory: check the current
 * edition.
 */
export const ISO_14694: Readonly<
  Record<'BV-3' | 'BV-4', Readonly<Record<'rigid' | 'flexible', Iso14694Limits>>>
> = {
  'BV-3': {
    rigid: { startup_mm_s: 4.5, alarm_mm_s: 7.1, shutdown_mm_s: 9.0 },
    flexible: { startup_mm_s: 6.3, alarm_mm_s: 11.8, shutdown_mm_s: 12.5 },
  },
  'BV-4': {
    rigid: { startup_mm_s: 2.8, alarm_mm_s: 4.5, shutdown_mm_s: 7.1 },
    flexible: { startup_mm_s: 4.5, alarm_mm_s: 7.1, shutdown_mm_s: 11.2 },
  },
};

export function iso20816Limits(group: 1 | 2, support: 'rigid' | 'flexible'): Limits {
  return {
    ...ISO_20816_3[group][support],
    source: 'iso20816',
    basis: `ISO 20816-3 group ${group}, ${support} support`,
  };
}

/**
 * Maps the fan-standard levels onto zones: A up to start-up, B up to alarm, C up to shut-down, D
 * above.
 */
export function iso14694Limits(category: 'BV-3' | 'BV-4', mounting: 'rigid' | 'flexible'): Limits {
  const l = ISO_14694[category][mounting];
  return {
    ab_mm_s: l.startup_mm_s,
    bc_mm_s: l.alarm_mm_s,
    cd_mm_s: l.shutdown_mm_s,
    source: 'iso14694',
    basis:
      `ISO 14694 ${category}, ${mounting} mounting (values from ` +
      `memory: A up to start-up, B up to alarm, C up to shut-down)`,
  };
}

export function customLimits(b: Boundaries): Limits {
  return {
    ab_mm_s: b.ab_mm_s,
    bc_mm_s: b.bc_mm_s,
    cd_mm_s: b.cd_mm_s,
    source: 'custom',
    basis: 'limits set in the config (watcher.limits)',
  };
}

export function scaleBoundaries(b: Boundaries, k: number): Boundaries {
  return { ab_mm_s: b.ab_mm_s * k, bc_mm_s: b.bc_mm_s * k, cd_mm_s: b.cd_mm_s * k };
}

export function zoneIndex(z: Zone): number {
  return ZONES.indexOf(z);
}

/** The zone a value falls in. */
export function classifyZone(valueMmS: number, b: Boundaries): Zone {
  if (valueMmS <= b.ab_mm_s) return 'A';
  if (valueMmS <= b.bc_mm_s) return 'B';
  if (valueMmS <= b.cd_mm_s) return 'C';
  return 'D';
}

/**
 * Zone with hysteresis: the zone rises as soon as a boundary is passed, but drops only once the
 * value is `share` below the boundary it came over. `previous` is the last zone this returned (null
 * at start).
 */
export function zoneWithHysteresis(
  valueMmS: number,
  previous: Zone | null,
  b: Boundaries,
  share: number,
): Zone {
  const raw = classifyZone(valueMmS, b);
  if (previous === null || zoneIndex(raw) >= zoneIndex(previous)) return raw;
  const lowered = classifyZone(valueMmS, scaleBoundaries(b, 1 - share));
  return zoneIndex(lowered) < zoneIndex(previous) ? lowered : previous;
}

/** The worse of two zones. */
export function worseZone(a: Zone, b: Zone): Zone {
  return zoneIndex(a) >= zoneIndex(b) ? a : b;
}

/**
 * ISO 20816-3 alarm setting once a baseline exists: baseline + 0.25 x (B/C), normally not above
 * 1.25 x (B/C). Without a baseline overall the alarm sits at the B/C boundary.
 */
export function baselineAlarmMmS(baselineOverallMmS: number | null, bcMmS: number): number {
  if (baselineOverallMmS === null) return bcMmS;
  return Math.min(baselineOverallMmS + 0.25 * bcMmS, 1.25 * bcMmS);
}
