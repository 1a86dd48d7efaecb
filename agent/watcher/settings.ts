import type { Config, SensorConfig } from '../config/schema.js';
import type { WatcherConfig } from '../config/watcher.js';
import { UserError } from '../errors.js';
import { customLimits, iso14694Limits, iso20816Limits, type Limits } from './limits.js';

/** The watcher section with everything that depends on other sections worked out once. */
export interface WatcherSettings {
  readonly asset: string;
  readonly w: WatcherConfig;
  readonly limits: Limits;
  readonly ratedRpm: number | null;
  /** tach.pulses_per_rev as configured. */
  readonly pulsesPerRev: number;
  readonly rotor: 'centre_hung' | 'overhung';
  readonly blades: number | null;
  readonly sensors: readonly SensorConfig[];
  /**
   * The two rotor bearings compared for static/couple; null when fewer than two carry radial
   * sensors.
   */
  readonly bearings: readonly [string, string] | null;
  /**
   * The bearings either side of the coupling (watcher.unbalance.coupling); null when not
   * configured.
   */
  readonly coupling: { readonly driver: string; readonly driven: string } | null;
  /** 1x below this is too small to judge, mm/s r.m.s. */
  readonly minOneXMmS: number;
  /** Reported size of a 1x vector change from baseline, mm/s r.m.s. */
  readonly vectorChangeMmS: number;
}

function isRadial(s: { direction: string }): boolean {
  return s.direction === 'vertical' || s.direction === 'horizontal';
}

/**
 * Resolves the watcher settings and checks what the schema cannot see (sensor ids, bearing names).
 */
export function resolveWatcherSettings(cfg: Config): WatcherSettings {
  const w = cfg.watcher;
  const l = w.limits;
  const limits =
    l.source === 'iso20816'
      ? iso20816Limits(cfg.machine.group, cfg.machine.support)
      : l.source === 'iso14694'
        ? iso14694Limits(l.category, l.mounting ?? cfg.machine.support)
        : customLimits(l);

  const sensorIds = new Set(cfg.sensors.map((s) => s.id));
  for (const id of Object.keys(w.baseline?.channels ?? {})) {
    if (!sensorIds.has(id)) {
      throw new UserError(
        `watcher.baseline.channels.${id}`,
        `no sensor with id "${id}"`,
        `use one of the sensor ids: ${[...sensorIds].join(', ')}`,
      );
    }
  }

  const radialBearings: string[] = [];
  for (const s of cfg.sensors)
    if (isRadial(s) && !radialBearings.includes(s.bearing)) radialBearings.push(s.bearing);
  let bearings: readonly [string, string] | null =
    radialBearings.length >= 2 ? [radialBearings[0]!, radialBearings[1]!] : null;
  if (w.unbalance.bearings) {
    w.unbalance.bearings.forEach((b, i) => {
      if (!radialBearings.includes(b)) {
        throw new UserError(
          `watcher.unbalance.bearings[${i}]`,
          `bearing "${b}" has no vertical or horizontal sensor`,
          `name bearings that carry radial sensors: ${radialBearings.join(', ') || '(none)'}`,
        );
      }
    });
    if (w.unbalance.bearings[0] === w.unbalance.bearings[1]) {
      throw new UserError(
        'watcher.unbalance.bearings',
        'names the same bearing twice',
        'name the two rotor bearings, e.g. [DE, NDE]',
      );
    }
    bearings = w.unbalance.bearings;
  }

  // Levels that only make sense below the C/D boundary of the limits in force.
  const cd = limits.cd_mm_s;
  const levels: [string, number | undefined][] = [
    [
      'watcher.unbalance.significance.overall_mm_s',
      w.unbalance.significance.basis === 'custom'
        ? w.unbalance.significance.overall_mm_s
        : undefined,
    ],
    ['watcher.unbalance.min_one_x_rms_mm_s', w.unbalance.min_one_x_rms_mm_s],
    ['watcher.vector_change_mm_s', w.vector_change_mm_s],
  ];
  for (const [path, v] of levels) {
    if (v !== undefined && v > cd) {
      throw new UserError(
        path,
        `${v} mm/s is above the C/D boundary (${cd} mm/s, ` +
          `${limits.basis}): nothing below zone D would ever reach it`,
        `give a value above 0 and at most ${cd} mm/s`,
      );
    }
  }

  const coupling = w.unbalance.coupling ?? null;
  if (coupling) {
    const axialBearings = [
      ...new Set(cfg.sensors.filter((x) => x.direction === 'axial').map((x) => x.bearing)),
    ];
    for (const side of ['driver', 'driven'] as const) {
      if (!axialBearings.includes(coupling[side])) {
        throw new UserError(
          `watcher.unbalance.coupling.${side}`,
          `bearing "${coupling[side]}" has no axial sensor`,
          `name bearings that carry an axial sensor: ${axialBearings.join(', ') || '(none)'}`,
        );
      }
    }
    if (coupling.driver === coupling.driven)
      throw new UserError(
        'watcher.unbalance.coupling',
        'names the same bearing on both sides',
        'name the driver-side and the driven-side bearing of the coupling',
      );
  }

  return {
    asset: cfg.machine.id,
    coupling,
    w,
    limits,
    ratedRpm: cfg.machine.rated_rpm ?? null,
    pulsesPerRev: cfg.tach.pulses_per_rev,
    rotor: cfg.machine.rotor,
    blades: cfg.machine.blades ?? null,
    sensors: cfg.sensors,
    bearings,
    minOneXMmS: w.unbalance.min_one_x_rms_mm_s ?? 0.5 * limits.ab_mm_s,
    vectorChangeMmS: w.vector_change_mm_s ?? 0.25 * limits.bc_mm_s,
  };
}
