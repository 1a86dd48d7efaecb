import type { SensorConfig } from '../../config/schema.js';
import type { WindowResult } from '../../dsp/types.js';
import type { WatchStatus } from '../../watcher/index.js';
import { DataType, type MetricMsg, type PropertySetMsg } from './proto.js';

/**
 * The fan as one Sparkplug device: which metrics it has (name, alias, datatype, engineering unit)
 * and their values from a window, the watcher's verdicts and the advisory. Pure functions; the
 * node (node.ts) keeps the current values and publishes what changed.
 */

export type MetricValue = number | boolean | string | null;

export interface MetricDef {
  readonly name: string;
  /** Unique across the edge node's metrics (Sparkplug 3.0, tck-id-payloads-alias-uniqueness). */
  readonly alias: number;
  readonly datatype: (typeof DataType)['Double' | 'Boolean' | 'String'];
  /** Engineering unit, sent as the "engUnit" property in the birth; absent for text and flags. */
  readonly unit?: string;
  readonly description: string;
}

/** Name of the metric that carries events (turnwise.event.v1 JSON, one per DDATA). */
export const EVENT_METRIC = 'Event';

/**
 * Metric names and definitions, in the order they appear in the DBIRTH. Aliases start at 1 (the
 * node's own metrics carry none).
 */
export function deviceMetrics(sensors: readonly SensorConfig[]): MetricDef[] {
  const defs: Omit<MetricDef, 'alias'>[] = [
    {
      name: 'Speed',
      datatype: DataType.Double,
      unit: 'rpm',
      description: 'Mean shaft speed over the last window, from the once-per-turn tach, r/min.',
    },
  ];
  for (const s of sensors) {
    const at = `${s.bearing} ${s.direction}`;
    defs.push(
      {
        name: `${s.id}/Overall`,
        datatype: DataType.Double,
        unit: 'mm/s',
        description:
          `Broadband velocity r.m.s. at ${at}, in the ` +
          `window's band (ISO 20816-3: 10-1000 Hz).`,
      },
      {
        name: `${s.id}/1x Amplitude`,
        datatype: DataType.Double,
        unit: 'mm/s',
        description: `1x (once-per-revolution) velocity amplitude at ${at}, zero to peak.`,
      },
      {
        name: `${s.id}/1x Phase`,
        datatype: DataType.Double,
        unit: 'deg',
        description:
          `1x phase at ${at}: lag from the tach rising ` +
          `edge to the positive peak of velocity, 0-360.`,
      },
      {
        name: `${s.id}/Zone`,
        datatype: DataType.String,
        description:
          `Severity zone A-D at ${at}; empty when not ` +
          `judged (sensor not OK, below minimum speed).`,
      },
      {
        name: `${s.id}/Sensor OK`,
        datatype: DataType.Boolean,
        description: `Sensor at ${at} judged healthy (bias, clipping, signal).`,
      },
    );
  }
  defs.push(
    {
      name: 'Machine Zone',
      datatype: DataType.String,
      description: 'Worst zone among healthy sensors (A-D), or "unknown".',
    },
    {
      name: 'Unbalance/Verdict',
      datatype: DataType.String,
      description:
        "The watcher's 1x verdict: static, couple, dynamic, overhung, " +
        'or none (1x points to another cause or is too small).',
    },
    {
      name: 'Unbalance/Confidence',
      datatype: DataType.String,
      description: 'high, medium or low: how much of the rule set the data allowed.',
    },
    {
      name: 'Advisory/State',
      datatype: DataType.String,
      description:
        'Safe-stop advisory (an advisory to people, not a ' +
        'protective trip): normal, raised, acknowledged, latched.',
    },
    {
      name: 'Advisory/Outputs Energised',
      datatype: DataType.Boolean,
      description: 'Advisory relay and lamp energised (true = all well).',
    },
    {
      name: EVENT_METRIC,
      datatype: DataType.String,
      description:
        'Each event as turnwise.event.v1 JSON; is_historical ' +
        'when it waited in the outbox through an outage.',
    },
  );
  return defs.map((d, i) => ({ ...d, alias: i + 1 }));
}

export interface AdvisoryView {
  readonly state: string | null;
  readonly energised: boolean | null;
}

/**
 * Current values of the device's metrics (all but Event) from the last window, the watcher's status
 * and the advisory.
 */
export function metricValues(
  sensors: readonly SensorConfig[],
  w: WindowResult | null,
  st: WatchStatus | null,
  adv: AdvisoryView | null,
): Map<string, MetricValue> {
  const v = new Map<string, MetricValue>();
  v.set('Speed', w?.speed_rpm ?? null);
  const latest = st?.latest ?? null;
  for (const s of sensors) {
    const ch = w?.channels.find((c) => c.id === s.id);
    const x1 = ch?.orders['1'];
    v.set(`${s.id}/Overall`, ch?.overall_rms_mm_s ?? null);
    v.set(`${s.id}/1x Amplitude`, x1 ? x1.amp_pk_mm_s : null);
    v.set(`${s.id}/1x Phase`, x1 ? x1.phase_deg : null);
    const z = latest && !latest.zone.inhibited ? (latest.zone.channels[s.id]?.zone ?? null) : null;
    v.set(`${s.id}/Zone`, z === 'A' || z === 'B' || z === 'C' || z === 'D' ? z : '');
    v.set(
      `${s.id}/Sensor OK`,
      latest ? (latest.sensors.find((x) => x.id === s.id)?.ok ?? null) : null,
    );
  }
  v.set('Machine Zone', latest ? (latest.zone.inhibited ? 'unknown' : latest.zone.machine) : null);
  v.set('Unbalance/Verdict', latest?.unbalance.kind ?? null);
  v.set('Unbalance/Confidence', latest?.unbalance.confidence ?? null);
  v.set('Advisory/State', adv?.state ?? null);
  v.set('Advisory/Outputs Energised', adv?.energised ?? null);
  return v;
}

/**
 * The value part of a metric message for a datatype; null becomes is_null (Sparkplug 3.0,
 * tck-id-operational-behavior-data-publish-dbirth-values).
 */
export function valueFields(datatype: number, value: MetricValue): Partial<MetricMsg> {
  if (
    value === null ||
    value === undefined ||
    (typeof value === 'number' && !Number.isFinite(value))
  )
    return { is_null: true };
  switch (datatype) {
    case DataType.Double:
      return { double_value: Number(value) };
    case DataType.Boolean:
      return { boolean_value: Boolean(value) };
    case DataType.String:
      return { string_value: String(value) };
    case DataType.Int64:
    case DataType.UInt64:
      return { long_value: Number(value) };
    default:
      throw new Error(`no value encoding for datatype ${datatype}`);
  }
}

export function propertiesOf(d: MetricDef): PropertySetMsg {
  const keys = ['description'];
  const values = [{ type: DataType.String, string_value: d.description }];
  if (d.unit) {
    keys.unshift('engUnit');
    values.unshift({ type: DataType.String, string_value: d.unit });
  }
  return { keys, values };
}

/** Two values are the same for report by exception. */
export function sameValue(a: MetricValue | undefined, b: MetricValue): boolean {
  return (
    a === b ||
    (typeof a === 'number' && typeof b === 'number' && Number.isNaN(a) && Number.isNaN(b))
  );
}
