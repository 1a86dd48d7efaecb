import { z } from 'zod';
import type { EventBase } from '../events.js';
import type { WatcherConfig } from '../config/watcher.js';
import { OnDelay } from './debounce.js';
import type { WatcherEventType } from './events.js';

/**
 * The watcher's confirmed states, one row each: the snapshot key, whether there is one value for
 * the machine or one per sensor, the values it takes, the on-delay before a new value is confirmed,
 * and the event (with its severity) that a confirmed change raises. The snapshot written to
 * `<state_dir>/watcher/state.json`, its zod schema and `WatchStatus.confirmed` are all derived from
 * this table: adding a state is adding a row.
 */

type Severity = EventBase['severity'];
type Scalar = string | boolean;

export interface StateRow<T extends Scalar> {
  readonly subjects: 'machine' | 'sensor';
  readonly value: z.ZodType<T>;
  /** Seconds of measured data a new value must hold before it is confirmed. */
  readonly delay_s: (w: WatcherConfig, to: T) => number;
  /**
   * The event a confirmed change from `from` (undefined: nothing confirmed yet) to `to` raises;
   * null: none.
   */
  readonly event: (
    from: T | undefined,
    to: T,
  ) => { readonly type: WatcherEventType; readonly severity: Severity } | null;
  readonly doc: string;
}

const row = <T extends Scalar>(r: StateRow<T>): StateRow<T> => r;
const onDelay = (w: WatcherConfig): number => w.on_delay_s;
const zone = z.enum(['A', 'B', 'C', 'D']);
type ZoneValue = z.infer<typeof zone>;
const zoneSeverity = (zn: ZoneValue): Severity =>
  zn === 'D' ? 'alarm' : zn === 'C' ? 'warning' : 'info';
/** A boolean condition: raised when it becomes true, cleared when it falls back from true. */
const condition =
  (raised: WatcherEventType, cleared: WatcherEventType, severity: Severity) =>
  (from: boolean | undefined, to: boolean) =>
    to
      ? { type: raised, severity }
      : from === true
        ? { type: cleared, severity: 'info' as const }
        : null;

export const STATE_ROWS = {
  machine_zone: row({
    subjects: 'machine',
    value: zone,
    delay_s: onDelay,
    event: (_f, to) => ({ type: 'zone_changed', severity: zoneSeverity(to) }),
    doc: 'Worst zone among the OK sensors (a doubtful sensor alone does not raise it to D).',
  }),
  zones: row({
    subjects: 'sensor',
    value: zone,
    delay_s: onDelay,
    event: (_f, to) => ({ type: 'zone_changed', severity: zoneSeverity(to) }),
    doc: 'Zone of each OK sensor, with hysteresis.',
  }),
  over_alarm: row({
    subjects: 'sensor',
    value: z.boolean(),
    delay_s: onDelay,
    event: condition('alarm_level_exceeded', 'alarm_level_cleared', 'warning'),
    doc: 'Overall above the alarm level in force (ISO 20816-3 baseline alarm, or B/C).',
  }),
  unbalance: row({
    subjects: 'machine',
    value: z.enum(['static', 'couple', 'dynamic', 'overhung', 'none']),
    delay_s: onDelay,
    event: (from, to) =>
      to === 'none'
        ? from !== undefined
          ? { type: 'unbalance_cleared', severity: 'info' }
          : null
        : from === undefined || from === 'none'
          ? { type: 'unbalance_found', severity: 'warning' }
          : { type: 'unbalance_kind_changed', severity: 'info' },
    doc: 'Unbalance verdict (kind "none" while nothing significant is found).',
  }),
  sensor_ok: row({
    subjects: 'sensor',
    value: z.boolean(),
    delay_s: (w, to) => (to ? w.sensor_health.ok_after_s : w.on_delay_s),
    event: (from, to) =>
      !to
        ? { type: 'sensor_not_ok', severity: 'warning' }
        : from === false
          ? { type: 'sensor_ok', severity: 'info' }
          : null,
    doc: 'Sensor healthy; a fault must be gone for watcher.sensor_health.ok_after_s before it is OK again.',
  }),
  sensor_doubt: row({
    subjects: 'sensor',
    value: z.boolean(),
    delay_s: onDelay,
    event: condition('sensor_doubtful', 'sensor_doubt_cleared', 'warning'),
    doc: 'A finding that can be a sensor fault or real vibration (state.json v2).',
  }),
  tach: row({
    subjects: 'machine',
    value: z.enum(['ok', 'lost', 'stopped']),
    delay_s: onDelay,
    event: (from, to) =>
      to === 'lost'
        ? { type: 'tach_lost', severity: 'warning' }
        : to === 'ok' && from === 'lost'
          ? { type: 'tach_back', severity: 'info' }
          : null,
    doc: 'Once-per-turn reference.',
  }),
  speed: row({
    subjects: 'machine',
    value: z.enum(['in_range', 'low', 'high']),
    delay_s: onDelay,
    event: (from, to) =>
      to !== 'in_range'
        ? { type: 'speed_out_of_range', severity: 'info' }
        : from !== undefined
          ? { type: 'speed_in_range', severity: 'info' }
          : null,
    doc: 'Speed against machine.rated_rpm.',
  }),
  vector_changed: row({
    subjects: 'sensor',
    value: z.boolean(),
    delay_s: onDelay,
    event: condition('vector_change', 'vector_change_cleared', 'warning'),
    doc: '1x vector changed from the baseline by at least the reported size.',
  }),
} as const;

export type StateKey = keyof typeof STATE_ROWS;
export type ValueOf<K extends StateKey> =
  (typeof STATE_ROWS)[K] extends StateRow<infer T> ? T : never;
type Stored<K extends StateKey> = (typeof STATE_ROWS)[K]['subjects'] extends 'machine'
  ? ValueOf<K> | null
  : Readonly<Record<string, ValueOf<K>>>;

/** The confirmed states, keyed as in STATE_ROWS. */
export type ConfirmedStates = { readonly [K in StateKey]: Stored<K> };

export const STATE_VERSION = 2;

/**
 * What the watcher has confirmed and reported, so a restart neither repeats nor loses events
 * (state.json).
 */
export type WatcherSnapshot = {
  readonly version: typeof STATE_VERSION;
  readonly run: number;
} & ConfirmedStates;

const KEYS = Object.keys(STATE_ROWS) as StateKey[];

function rowSchema(r: StateRow<Scalar>): z.ZodType {
  return r.subjects === 'machine' ? r.value.nullable() : z.record(z.string(), r.value);
}

/** zod schema of state.json v2, derived from the table. */
export const snapshotSchemaV2 = z
  .object({
    version: z.literal(STATE_VERSION),
    run: z.number().int().min(0),
    ...Object.fromEntries(KEYS.map((k) => [k, rowSchema(STATE_ROWS[k] as StateRow<Scalar>)])),
  })
  .strict();

/** state.json v1 (before the table): the same states without sensor_doubt. */
const V1_KEYS = KEYS.filter((k) => k !== 'sensor_doubt');
const snapshotSchemaV1 = z.object({
  version: z.literal(1),
  run: z.number().int().min(0),
  ...Object.fromEntries(V1_KEYS.map((k) => [k, rowSchema(STATE_ROWS[k] as StateRow<Scalar>)])),
});

/** Reads state.json of any known version; v1 is migrated (the states it lacks start empty). */
export const snapshotFileSchema = z
  .union([snapshotSchemaV2, snapshotSchemaV1])
  .transform((s): WatcherSnapshot => {
    if (s.version === STATE_VERSION) return s as unknown as WatcherSnapshot;
    const out: Record<string, unknown> = { version: STATE_VERSION, run: s.run };
    for (const k of KEYS)
      out[k] =
        (s as Record<string, unknown>)[k] ?? (STATE_ROWS[k].subjects === 'machine' ? null : {});
    return out as WatcherSnapshot;
  });

export interface StateChange<T> {
  readonly from: T | undefined;
  readonly to: T;
  /** The event this change raises, or null. */
  readonly event: { readonly type: WatcherEventType; readonly severity: Severity } | null;
}

/** On-delays for every row and subject, started from a snapshot. */
export class StateTable {
  private readonly delays = new Map<StateKey, Map<string, OnDelay<Scalar>>>();

  constructor(
    private readonly w: WatcherConfig,
    sensorIds: readonly string[],
    prev: WatcherSnapshot | null,
  ) {
    for (const k of KEYS) {
      const r = STATE_ROWS[k] as StateRow<Scalar>;
      const m = new Map<string, OnDelay<Scalar>>();
      const stored = prev?.[k] as unknown;
      const subjects = r.subjects === 'machine' ? ['machine'] : sensorIds;
      for (const id of subjects) {
        const initial =
          r.subjects === 'machine'
            ? ((stored as Scalar | null | undefined) ?? undefined)
            : (stored as Record<string, Scalar> | undefined)?.[id];
        m.set(id, new OnDelay<Scalar>((to) => r.delay_s(w, to), initial));
      }
      this.delays.set(k, m);
    }
  }

  /** Feeds one window's value; returns the confirmed change (with its event), or null. */
  update<K extends StateKey>(
    key: K,
    subject: string,
    seen: ValueOf<K>,
    t0: number,
    t1: number,
  ): StateChange<ValueOf<K>> | null {
    const d = this.delays.get(key)!.get(subject);
    if (!d) return null;
    const c = d.update(seen, t0, t1);
    if (!c) return null;
    return {
      from: c.from as ValueOf<K> | undefined,
      to: c.to as ValueOf<K>,
      event: (STATE_ROWS[key] as unknown as StateRow<ValueOf<K>>).event(
        c.from as ValueOf<K> | undefined,
        c.to as ValueOf<K>,
      ),
    };
  }

  value<K extends StateKey>(key: K, subject: string): ValueOf<K> | undefined {
    return this.delays.get(key)!.get(subject)?.value as ValueOf<K> | undefined;
  }

  /** Forgets the confirmed values of one row (e.g. vector change after a new baseline). */
  reset(key: StateKey, value?: Scalar): void {
    for (const d of this.delays.get(key)!.values()) d.reset(value);
  }

  states(): ConfirmedStates {
    const out: Record<string, unknown> = {};
    for (const k of KEYS) {
      const m = this.delays.get(k)!;
      if (STATE_ROWS[k].subjects === 'machine') out[k] = m.get('machine')!.value ?? null;
      else {
        const rec: Record<string, Scalar> = {};
        for (const [id, d] of m) if (d.value !== undefined) rec[id] = d.value;
        out[k] = rec;
      }
    }
    return out as ConfirmedStates;
  }
}
