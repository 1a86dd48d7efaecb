import { dirname, resolve as resolvePath } from 'node:path';
import { z } from 'zod';
import { formatIssues, readYamlFile } from '../../agent/config/load.js';
import type { Config } from '../../agent/config/schema.js';
import { UserError } from '../../agent/errors.js';
import {
  isOutboard,
  naturalHz,
  rpmToRadS,
  type Direction,
  type RotorGeometry,
  type SensorPlace,
  type SupportDynamics,
} from './physics.js';

/**
 * The scenario file of the simulated fan (YAML): the rotor, its supports, the unbalance and balance
 * weights it starts with, the tach and signal levels, and a timeline of events. It is read together
 * with the agent's config, whose sensors and tach channel give the channel map (the same as a real
 * board). `resolveScenario` checks the two against each other and produces a `SimPlan` in SI units.
 */

const name = z
  .string()
  .regex(
    /^[A-Za-z0-9][A-Za-z0-9_.-]{0,31}$/,
    'letters, digits, "_", "." or "-", at most 32 characters',
  );
const angleDeg = z.number().min(-360).max(360);
const positive = z.number().positive();
const rampDays = z
  .number()
  .min(0)
  .max(3650)
  .default(0)
  .describe('Days over which the fault grows linearly from nothing to full size (0 = at once).');

const AT_PATTERN = /^day\s+(\d+(?:\.\d+)?)(?:\s+(\d{1,2}):(\d{2})(?::(\d{2}(?:\.\d+)?))?)?$/i;

/**
 * Parses an event time: seconds from the scenario start, or "day N [HH:MM[:SS]]" (day 0 is the
 * first day).
 */
export function parseAt(v: unknown): number | undefined {
  if (typeof v === 'number') return Number.isFinite(v) && v >= 0 ? v : undefined;
  if (typeof v !== 'string') return undefined;
  const m = AT_PATTERN.exec(v.trim());
  if (!m) return undefined;
  const [h, min, s] = [Number(m[2] ?? 0), Number(m[3] ?? 0), Number(m[4] ?? 0)];
  if (h > 23 || min > 59 || s >= 60) return undefined;
  return Number(m[1]) * 86400 + h * 3600 + min * 60 + s;
}

/** Writes a time in seconds the way the timeline is written: "day 5 14:20:00". */
export function formatAt(seconds: number): string {
  const day = Math.floor(seconds / 86400);
  let rest = seconds - day * 86400;
  const h = Math.floor(rest / 3600);
  rest -= h * 3600;
  const m = Math.floor(rest / 60);
  const s = rest - m * 60;
  const pad = (n: number) => String(n).padStart(2, '0');
  return `day ${day} ${pad(h)}:${pad(m)}:${pad(Math.floor(s))}`;
}

const at = z.unknown().transform((v, ctx) => {
  const t = parseAt(v);
  if (t === undefined) {
    ctx.addIssue({
      code: 'custom',
      message: 'expected seconds from the start (>= 0) or "day N [HH:MM[:SS]]", e.g. "day 5 14:20"',
    });
    return z.NEVER;
  }
  return t;
});

const supportSchema = z
  .object({
    stiffness_mn_per_m: positive.max(1e5).describe('Support stiffness in this direction, MN/m.'),
    natural_hz: positive
      .max(1e5)
      .optional()
      .describe(
        'Natural frequency of the support in this direction, Hz. Default: ' +
          'sqrt(k/m)/2pi with m the rotor mass the bearing carries.',
      ),
    damping_ratio: z
      .number()
      .gt(0)
      .lt(1)
      .optional()
      .describe('Fraction of critical damping; default rotor.support.damping_ratio.'),
  })
  .strict();

const supportSetSchema = z
  .object({
    vertical: supportSchema,
    horizontal: supportSchema,
    axial: supportSchema,
    damping_ratio: z.number().gt(0).lt(1).default(0.05),
  })
  .strict();

const massSchema = z
  .object({
    plane: name,
    mass_g: positive.max(1e6),
    radius_mm: positive.max(1e5),
    angle_deg: angleDeg.describe(
      'From the reference mark, in the direction given by rotor.angle_convention.',
    ),
  })
  .strict();

const weightSchema = massSchema.extend({ id: name });

const faultSchema = z.discriminatedUnion('kind', [
  z
    .object({
      kind: z.literal('misalignment'),
      id: name,
      coupling_bearing: name.describe('The bearing next to the coupling.'),
      amp_pk_mm_s: positive
        .max(1000)
        .describe('Radial 2x velocity at the coupling bearing at rated speed, mm/s peak.'),
      axial_ratio: z
        .number()
        .min(0)
        .max(10)
        .default(1)
        .describe('Axial 1x at the coupling bearing per radial 2x.'),
      angle_deg: angleDeg.default(0),
      ramp_days: rampDays,
    })
    .strict(),
  z
    .object({
      kind: z.literal('looseness'),
      id: name,
      bearing: name,
      amp_pk_mm_s: positive
        .max(1000)
        .describe(
          '1x velocity of the looseness pattern at rated speed, ' +
            'mm/s peak; harmonics fall off as 1/sqrt(order).',
        ),
      direction: z
        .enum(['vertical', 'horizontal'])
        .default('vertical')
        .describe('Direction of the loose joint; the other radial direction sees half.'),
      harmonics: z.number().int().min(2).max(10).default(8),
      half_orders: z.boolean().default(true),
      jitter_deg: z
        .number()
        .min(0)
        .max(180)
        .default(30)
        .describe('Random walk of each harmonic phase, degrees per revolution (erratic phase).'),
      ramp_days: rampDays,
    })
    .strict(),
  z
    .object({
      kind: z.literal('bent_shaft'),
      id: name,
      amp_pk_mm_s: positive
        .max(1000)
        .describe('Axial 1x velocity at rated speed, mm/s peak; 180 deg apart end to end.'),
      radial_ratio: z
        .number()
        .min(0)
        .max(10)
        .default(0.5)
        .describe('Radial 1x per axial 1x (in phase at both bearings).'),
      angle_deg: angleDeg.default(0).describe('Angle of the bow from the reference mark.'),
      ramp_days: rampDays,
    })
    .strict(),
  z
    .object({
      kind: z.literal('eccentricity'),
      id: name,
      bearing: name,
      amp_pk_mm_s: positive
        .max(1000)
        .describe('1x velocity along the line of action at rated speed, mm/s peak.'),
      line_deg: z
        .number()
        .min(-360)
        .max(360)
        .optional()
        .describe(
          'Stator angle of the straight-line motion, from the tach ' +
            'pickup with rotation. Default: 15 deg past the vertical.',
        ),
      angle_deg: angleDeg.default(0),
      ramp_days: rampDays,
    })
    .strict(),
  z
    .object({
      kind: z.literal('bearing_defect'),
      id: name,
      bearing: name,
      order: positive
        .max(100)
        .describe('Defect frequency in orders of running speed (not a whole number, e.g. 3.58).'),
      amp_pk_mm_s: positive
        .max(1000)
        .describe(
          'Velocity of the defect tone at rated speed, mm/s peak; harmonics fall off as 1/h.',
        ),
      harmonics: z.number().int().min(1).max(10).default(3),
      ring_hz: positive
        .max(50000)
        .default(3000)
        .describe('Structural resonance rung by the impacts, Hz.'),
      ring_pk_g: z
        .number()
        .min(0)
        .max(1000)
        .default(0.2)
        .describe('Peak acceleration of the ringing, g.'),
      ramp_days: rampDays,
    })
    .strict(),
  z
    .object({
      kind: z.literal('tone'),
      id: name,
      bearing: name.optional().describe('Bearing it shows at; all bearings when omitted.'),
      freq_hz: positive.max(50000).describe('Fixed frequency, Hz (not tied to running speed).'),
      amp_pk_mm_s: positive.max(1000),
      ramp_days: rampDays,
    })
    .strict(),
]);

const eventSchema = z
  .object({
    at,
    note: z.string().max(200).optional().describe('Free text, printed when the event is applied.'),
    start: z
      .object({ rpm: positive.max(60000), ramp_s: positive.max(3600).default(15) })
      .strict()
      .optional(),
    stop: z
      .object({ coast_s: positive.max(36000).default(90) })
      .strict()
      .optional(),
    speed: z
      .object({ rpm: positive.max(60000), ramp_s: positive.max(3600).default(10) })
      .strict()
      .optional(),
    build_up: z
      .object({
        plane: name,
        mass_g_per_day: positive.max(1e5),
        radius_mm: positive.max(1e5),
        angle_deg: angleDeg,
        days: positive
          .max(3650)
          .optional()
          .describe('Stops growing after this many days; grows until shed otherwise.'),
      })
      .strict()
      .optional(),
    build_up_shed: z
      .object({ plane: name, fraction: z.number().gt(0).max(1) })
      .strict()
      .optional(),
    weight_added: weightSchema.optional(),
    weight_thrown: z.object({ id: name }).strict().optional(),
    weight_removed: z.object({ id: name }).strict().optional(),
    fault: faultSchema.optional(),
    fault_cleared: z.object({ id: name }).strict().optional(),
    support_change: z
      .object({
        bearing: name,
        direction: z.enum(['vertical', 'horizontal', 'axial']),
        natural_hz: positive
          .max(1e5)
          .optional()
          .describe(
            'New natural frequency, Hz. Default: unchanged, or moved with sqrt(new/old ' +
              'stiffness) when stiffness_mn_per_m is given (same mass on the support).',
          ),
        stiffness_mn_per_m: positive.max(1e5).optional(),
        damping_ratio: z.number().gt(0).lt(1).optional(),
        ramp_days: rampDays,
      })
      .strict()
      .optional(),
    sensor_fault: z
      .object({
        sensor: name,
        kind: z.enum(['open', 'short', 'flat', 'clipping']),
        gain: positive.max(1000).default(1).describe('clipping: signal gain before the limit.'),
        limit_v: positive
          .max(100)
          .optional()
          .describe('clipping: the output is held within bias +/- limit_v.'),
      })
      .strict()
      .optional(),
    sensor_repaired: z.object({ sensor: name }).strict().optional(),
    tach_fault: z
      .object({
        kind: z.enum(['lost', 'intermittent']),
        missing_fraction: z
          .number()
          .gt(0)
          .max(1)
          .default(0.2)
          .describe('intermittent: share of pulses missing.'),
      })
      .strict()
      .optional(),
    tach_repaired: z.object({}).strict().optional(),
  })
  .strict();

export const EVENT_ACTIONS = [
  'start',
  'stop',
  'speed',
  'build_up',
  'build_up_shed',
  'weight_added',
  'weight_thrown',
  'weight_removed',
  'fault',
  'fault_cleared',
  'support_change',
  'sensor_fault',
  'sensor_repaired',
  'tach_fault',
  'tach_repaired',
] as const;

export const scenarioSchema = z
  .object({
    scenario: z.string().min(1).max(200).describe('Name of the scenario, shown in summaries.'),
    seed: z
      .number()
      .int()
      .min(0)
      .max(2 ** 31 - 1)
      .default(1)
      .describe(
        'Seed of the noise and of every random choice; the same seed gives the same samples.',
      ),
    sample_rate_hz: z.number().int().min(1000).max(200000),
    rotor: z
      .object({
        mass_kg: positive.max(1e6),
        centre_of_mass_mm: z
          .number()
          .optional()
          .describe(
            'Axial position of the rotor centre of mass; default midway between the planes.',
          ),
        angle_convention: z.enum(['against_rotation', 'with_rotation']).default('against_rotation'),
        bearings: z
          .array(
            z
              .object({
                name,
                position_mm: z.number(),
                support: z
                  .object({
                    vertical: supportSchema.optional(),
                    horizontal: supportSchema.optional(),
                    axial: supportSchema.optional(),
                  })
                  .strict()
                  .optional(),
              })
              .strict(),
          )
          .length(2),
        planes: z
          .array(z.object({ name, position_mm: z.number() }).strict())
          .min(1)
          .max(2),
        support: supportSetSchema,
        axial_coupling: z
          .object({
            between_bearings: z.number().min(0).max(5).default(0.05),
            outboard: z.number().min(0).max(5).default(1.5),
          })
          .strict()
          .default({ between_bearings: 0.05, outboard: 1.5 }),
        directions_deg: z
          .object({
            vertical: angleDeg.default(0),
            horizontal: angleDeg.default(90),
            axial: angleDeg.default(90),
          })
          .strict()
          .default({ vertical: 0, horizontal: 90, axial: 90 })
          .describe(
            "Stator angle of each direction's sensor position, " +
              'from the tach pickup in the direction of rotation.',
          ),
        unbalance: z
          .array(massSchema)
          .default([])
          .describe('Residual unbalance at the start (not removable).'),
        weights: z
          .array(weightSchema)
          .default([])
          .describe('Balance weights fitted at the start (can be thrown or removed).'),
      })
      .strict(),
    speed: z
      .object({
        rpm: z
          .number()
          .min(0)
          .max(60000)
          .default(0)
          .describe('Speed at the start of the timeline, r/min.'),
        rated_rpm: positive
          .max(60000)
          .optional()
          .describe(
            'Speed at which fault amplitudes are given; default machine.rated_rpm of the config.',
          ),
        drift_rpm: z
          .number()
          .min(0)
          .max(1000)
          .default(0)
          .describe('Amplitude of the slow speed wander, r/min at rated speed.'),
        drift_period_s: positive.max(1e6).default(600),
      })
      .strict()
      .default({ rpm: 0, drift_rpm: 0, drift_period_s: 600 }),
    tach: z
      .object({
        low_v: z.number().default(0),
        high_v: z.number().default(5),
        rise_us: positive
          .max(1e5)
          .default(150)
          .describe(
            'Linear rise (and fall) time of the pulse edges, ' +
              'microseconds; at least two sample periods.',
          ),
        mark_width_deg: positive.max(180).default(15),
        noise_rms_v: z.number().min(0).max(10).default(0.005),
      })
      .strict()
      .default({ low_v: 0, high_v: 5, rise_us: 150, mark_width_deg: 15, noise_rms_v: 0.005 }),
    signal: z
      .object({
        noise_rms_g: z
          .number()
          .min(0)
          .max(100)
          .default(0.002)
          .describe('White acceleration noise on every sensor, g r.m.s.'),
        iepe_bias_v: z
          .number()
          .min(0)
          .max(30)
          .optional()
          .describe(
            'DC bias added to every sensor, volts. Default: the middle of ' +
              "the sensor's bias_v window in the config, or 0 (AC-coupled).",
          ),
        supply_v: positive
          .max(40)
          .default(24)
          .describe('IEPE supply voltage; an open cable reads just below it.'),
        blade_pass_pk_mm_s: z
          .number()
          .min(0)
          .max(100)
          .default(0)
          .describe(
            'Blade-pass order (machine.blades of the config) velocity at rated speed, mm/s peak.',
          ),
      })
      .strict()
      .default({ noise_rms_g: 0.002, supply_v: 24, blade_pass_pk_mm_s: 0 }),
    timeline: z.array(eventSchema).default([]),
  })
  .strict()
  .superRefine((s, ctx) => {
    s.timeline.forEach((e, i) => {
      const actions = EVENT_ACTIONS.filter((k) => e[k] !== undefined);
      if (actions.length !== 1) {
        ctx.addIssue({
          code: 'custom',
          path: ['timeline', i],
          message:
            actions.length === 0
              ? `give one action: ${EVENT_ACTIONS.join(', ')}`
              : `give one action per event, found ` +
                `${actions.join(' and ')}; split them into separate events`,
        });
      }
      const prev = s.timeline[i - 1];
      if (prev && e.at < prev.at) {
        ctx.addIssue({
          code: 'custom',
          path: ['timeline', i, 'at'],
          message:
            `is before timeline[${i - 1}].at ` +
            `(${formatAt(prev.at)}); list events in time order`,
        });
      }
    });
    const [a, b] = s.rotor.bearings;
    if (a.position_mm === b.position_mm) {
      ctx.addIssue({
        code: 'custom',
        path: ['rotor', 'bearings', 1, 'position_mm'],
        message: 'must differ from rotor.bearings[0].position_mm',
      });
    }
    if (a.name === b.name)
      ctx.addIssue({
        code: 'custom',
        path: ['rotor', 'bearings', 1, 'name'],
        message: `bearing name "${b.name}" is used twice`,
      });
    if (s.rotor.planes.length === 2 && s.rotor.planes[0]!.name === s.rotor.planes[1]!.name) {
      ctx.addIssue({
        code: 'custom',
        path: ['rotor', 'planes', 1, 'name'],
        message: `plane name "${s.rotor.planes[1]!.name}" is used twice`,
      });
    }
    if (s.tach.high_v <= s.tach.low_v)
      ctx.addIssue({
        code: 'custom',
        path: ['tach', 'high_v'],
        message: 'must be above tach.low_v',
      });
    if (s.tach.rise_us * 1e-6 * s.sample_rate_hz < 2) {
      ctx.addIssue({
        code: 'custom',
        path: ['tach', 'rise_us'],
        message:
          `must span at least two sample periods (${(2e6 / s.sample_rate_hz).toFixed(1)} ` +
          `us at ${s.sample_rate_hz} Hz) so the edge can be timed between samples`,
      });
    }
  });

export type Scenario = z.infer<typeof scenarioSchema>;
export type ScenarioEvent = Scenario['timeline'][number];
export type FaultSpec = NonNullable<ScenarioEvent['fault']>;
export type WeightSpec = z.infer<typeof weightSchema>;
export type MassSpec = z.infer<typeof massSchema>;

const SCENARIO_DOC = 'docs/simulator.md, "Scenario file"';

/** Validates parsed scenario data. Throws UserError listing every problem by path. */
export function validateScenario(raw: unknown, file = 'scenario'): Scenario {
  const res = scenarioSchema.safeParse(raw);
  if (!res.success) {
    const lines = formatIssues(file, res.error.issues, raw, SCENARIO_DOC);
    throw new UserError(
      file,
      `${lines.length} problem(s) in the scenario:\n  ${lines.join('\n  ')}`,
      'fix the scenario file (config/example-scenario.yaml shows every section)',
    );
  }
  return res.data;
}

export function loadScenario(file: string): Scenario {
  return validateScenario(readYamlFile(file, 'scenario', 'config/example-scenario.yaml'), file);
}

// ---------------------------------------------------------------------------------------------
// Resolution against the config

export interface SimSensor {
  readonly id: string;
  readonly channel: number;
  readonly place: SensorPlace;
  /** Volts per g. */
  readonly v_per_g: number;
  readonly bias_v: number;
  /** Board input range; output is held within +/- this when set. */
  readonly full_scale_v: number | undefined;
}

export interface SimTach {
  readonly channel: number;
  readonly pulses_per_rev: number;
  readonly low_v: number;
  readonly high_v: number;
  readonly rise_s: number;
  readonly mark_width_rad: number;
  readonly noise_rms_v: number;
}

/** Everything the simulator needs, checked and in SI units. */
export interface SimPlan {
  readonly name: string;
  readonly seed: number;
  readonly sampleRate: number;
  readonly channelCount: number;
  readonly geometry: RotorGeometry;
  readonly angleConvention: 'against_rotation' | 'with_rotation';
  readonly sensors: readonly SimSensor[];
  readonly tach: SimTach;
  /** Speed at which fault amplitudes are given, rad/s. */
  readonly ratedOmega: number;
  readonly startRpm: number;
  readonly driftFraction: number;
  readonly driftPeriodS: number;
  readonly noiseRmsG: number;
  readonly supplyV: number;
  readonly blades: number;
  readonly bladePassPkMmS: number;
  readonly unbalance: readonly MassSpec[];
  readonly weights: readonly WeightSpec[];
  /** Events in time order, `at` in seconds. */
  readonly timeline: readonly ScenarioEvent[];
}

function bearingIndex(s: Scenario, bearing: string): number {
  return s.rotor.bearings.findIndex((b) => b.name === bearing);
}

/**
 * Checks a scenario against the config it will feed (bearing names, sensor ids, rotor type, tach
 * levels, ids used in the timeline) and builds the simulator's plan. Throws one UserError listing
 * every problem with the file and path it is in.
 */
export function resolveScenario(
  s: Scenario,
  cfg: Config,
  scenarioFile = 'scenario',
  configFile = 'config',
): SimPlan {
  const problems: string[] = [];
  const sp = (path: string, msg: string) => problems.push(`${scenarioFile}: ${path}: ${msg}`);
  const bearingNames = s.rotor.bearings.map((b) => b.name);
  const planeNames = s.rotor.planes.map((p) => p.name);
  const sensorIds = cfg.sensors.map((x) => x.id);
  const checkBearing = (path: string, b: string) => {
    if (!bearingNames.includes(b))
      sp(path, `no bearing "${b}" in rotor.bearings (${bearingNames.join(', ')})`);
  };
  const checkPlane = (path: string, p: string) => {
    if (!planeNames.includes(p))
      sp(path, `no plane "${p}" in rotor.planes (${planeNames.join(', ')})`);
  };

  cfg.sensors.forEach((x, i) => {
    if (!bearingNames.includes(x.bearing)) {
      problems.push(
        `${configFile}: sensors[${i}].bearing: bearing "${x.bearing}" is not ` +
          `in ${scenarioFile} rotor.bearings (${bearingNames.join(', ')}); ` +
          `name the scenario's bearings as the config does`,
      );
    }
  });
  const geometry = buildGeometry(s);
  const overhung = s.rotor.planes.some((p) => isOutboard(geometry, p.position_mm));
  if (overhung !== (cfg.machine.rotor === 'overhung')) {
    sp(
      'rotor.planes',
      `the planes are ${overhung ? 'outside' : 'between'} the bearings ` +
        `(${overhung ? 'overhung' : 'centre-hung'}) but ` +
        `${configFile} machine.rotor is ${cfg.machine.rotor}; make the two agree`,
    );
  }
  if (cfg.tach.trigger_v <= s.tach.low_v || cfg.tach.trigger_v >= s.tach.high_v) {
    sp(
      'tach',
      `the pulse (${s.tach.low_v} to ${s.tach.high_v} V) never crosses ` +
        `${configFile} tach.trigger_v (${cfg.tach.trigger_v} V); set low_v/high_v around it`,
    );
  }
  if (s.tach.mark_width_deg >= 180 / cfg.tach.pulses_per_rev) {
    sp(
      'tach.mark_width_deg',
      `must be under half the pulse pitch (${180 / cfg.tach.pulses_per_rev} deg ` +
        `for ${configFile} tach.pulses_per_rev ${cfg.tach.pulses_per_rev})`,
    );
  }
  const rated = s.speed.rated_rpm ?? cfg.machine.rated_rpm;
  if (rated === undefined)
    sp(
      'speed.rated_rpm',
      `not set and ${configFile} has no machine.rated_rpm; ` +
        `give the speed that fault amplitudes refer to`,
    );
  s.rotor.unbalance.forEach((m, i) => checkPlane(`rotor.unbalance[${i}].plane`, m.plane));
  const weights = new Set<string>();
  s.rotor.weights.forEach((w, i) => {
    checkPlane(`rotor.weights[${i}].plane`, w.plane);
    if (weights.has(w.id)) sp(`rotor.weights[${i}].id`, `weight id "${w.id}" is used twice`);
    weights.add(w.id);
  });

  const faults = new Set<string>();
  s.timeline.forEach((e, i) => {
    const p = `timeline[${i}]`;
    if (e.build_up) checkPlane(`${p}.build_up.plane`, e.build_up.plane);
    if (e.build_up_shed) checkPlane(`${p}.build_up_shed.plane`, e.build_up_shed.plane);
    if (e.weight_added) {
      checkPlane(`${p}.weight_added.plane`, e.weight_added.plane);
      if (weights.has(e.weight_added.id))
        sp(
          `${p}.weight_added.id`,
          `weight "${e.weight_added.id}" is already on the rotor; use a new id`,
        );
      weights.add(e.weight_added.id);
    }
    for (const k of ['weight_thrown', 'weight_removed'] as const) {
      const id = e[k]?.id;
      if (id === undefined) continue;
      if (!weights.has(id))
        sp(
          `${p}.${k}.id`,
          `no weight "${id}" on the rotor at that time ` +
            `(fitted: ${[...weights].join(', ') || 'none'})`,
        );
      weights.delete(id);
    }
    if (e.fault) {
      const f = e.fault;
      if ('bearing' in f && f.bearing !== undefined) checkBearing(`${p}.fault.bearing`, f.bearing);
      if (f.kind === 'misalignment')
        checkBearing(`${p}.fault.coupling_bearing`, f.coupling_bearing);
      faults.add(f.id);
    }
    if (e.fault_cleared && !faults.has(e.fault_cleared.id)) {
      sp(
        `${p}.fault_cleared.id`,
        `no fault "${e.fault_cleared.id}" is active at that ` +
          `time (active: ${[...faults].join(', ') || 'none'})`,
      );
    }
    if (e.fault_cleared) faults.delete(e.fault_cleared.id);
    if (e.support_change) {
      checkBearing(`${p}.support_change.bearing`, e.support_change.bearing);
      const c = e.support_change;
      if (
        c.natural_hz === undefined &&
        c.stiffness_mn_per_m === undefined &&
        c.damping_ratio === undefined
      ) {
        sp(`${p}.support_change`, 'give natural_hz, stiffness_mn_per_m or damping_ratio');
      }
    }
    if (e.sensor_fault?.kind === 'clipping' && e.sensor_fault.limit_v === undefined) {
      sp(
        `${p}.sensor_fault.limit_v`,
        'needed for kind clipping: the output swing (volts ' +
          'either side of the bias) where the signal flattens',
      );
    }
    for (const k of ['sensor_fault', 'sensor_repaired'] as const) {
      const id = e[k]?.sensor;
      if (id !== undefined && !sensorIds.includes(id))
        sp(
          `${p}.${k}.sensor`,
          `no sensor "${id}" in ${configFile} (sensors: ${sensorIds.join(', ')})`,
        );
    }
  });

  if (problems.length > 0) {
    throw new UserError(
      scenarioFile,
      `${problems.length} problem(s) between the scenario ` +
        `and the config:\n  ${problems.join('\n  ')}`,
      'make the scenario and the config describe the same fan and channels',
    );
  }

  const sensors: SimSensor[] = cfg.sensors.map((x) => {
    const place: SensorPlace = {
      bearing: bearingIndex(s, x.bearing),
      direction: x.direction,
      mounting_angle_deg: x.mounting_angle_deg,
    };
    const bias = s.signal.iepe_bias_v ?? (x.bias_v ? (x.bias_v.min + x.bias_v.max) / 2 : 0);
    return {
      id: x.id,
      channel: x.channel,
      place,
      v_per_g: x.sensitivity_mv_per_g / 1000,
      bias_v: bias,
      full_scale_v: x.full_scale_v,
    };
  });
  const channelCount = Math.max(cfg.tach.channel, ...cfg.sensors.map((x) => x.channel)) + 1;
  return {
    name: s.scenario,
    seed: s.seed,
    sampleRate: s.sample_rate_hz,
    channelCount,
    geometry,
    angleConvention: s.rotor.angle_convention,
    sensors,
    tach: {
      channel: cfg.tach.channel,
      pulses_per_rev: cfg.tach.pulses_per_rev,
      low_v: s.tach.low_v,
      high_v: s.tach.high_v,
      rise_s: s.tach.rise_us * 1e-6,
      mark_width_rad: (s.tach.mark_width_deg * Math.PI) / 180,
      noise_rms_v: s.tach.noise_rms_v,
    },
    ratedOmega: rpmToRadS(rated!),
    startRpm: s.speed.rpm,
    driftFraction: s.speed.drift_rpm / rated!,
    driftPeriodS: s.speed.drift_period_s,
    noiseRmsG: s.signal.noise_rms_g,
    supplyV: s.signal.supply_v,
    blades: cfg.machine.blades ?? 0,
    bladePassPkMmS: s.signal.blade_pass_pk_mm_s,
    unbalance: s.rotor.unbalance,
    weights: s.rotor.weights,
    timeline: s.timeline,
  };
}

/** Rotor mass carried by each bearing (statics of the centre of mass), kg. */
export function bearingMassesKg(s: Scenario): [number, number] {
  const [a, b] = s.rotor.bearings;
  const zc =
    s.rotor.centre_of_mass_mm ??
    s.rotor.planes.reduce((sum, p) => sum + p.position_mm, 0) / s.rotor.planes.length;
  const span = b.position_mm - a.position_mm;
  return [
    (s.rotor.mass_kg * (b.position_mm - zc)) / span,
    (s.rotor.mass_kg * (zc - a.position_mm)) / span,
  ];
}

function buildGeometry(s: Scenario): RotorGeometry {
  const masses = bearingMassesKg(s);
  const support = (i: 0 | 1, d: Direction): SupportDynamics => {
    const spec = s.rotor.bearings[i].support?.[d] ?? s.rotor.support[d];
    const k = spec.stiffness_mn_per_m * 1e6;
    // an overhung rotor can lift the far bearing (negative share): its support then carries no
    // rotor mass of its own; the housing's mass is unknown, so use a tenth of the rotor as a floor
    const m = Math.max(Math.abs(masses[i]), s.rotor.mass_kg * 0.1);
    return {
      stiffness_n_per_m: k,
      natural_hz: spec.natural_hz ?? naturalHz(k, m),
      damping_ratio: spec.damping_ratio ?? s.rotor.support.damping_ratio,
    };
  };
  const bearing = (i: 0 | 1) => ({
    name: s.rotor.bearings[i].name,
    position_mm: s.rotor.bearings[i].position_mm,
    support: {
      vertical: support(i, 'vertical'),
      horizontal: support(i, 'horizontal'),
      axial: support(i, 'axial'),
    },
  });
  return {
    bearings: [bearing(0), bearing(1)],
    planes: s.rotor.planes.map((p) => ({ name: p.name, position_mm: p.position_mm })),
    directions_deg: s.rotor.directions_deg,
    axial_coupling: s.rotor.axial_coupling,
  };
}

/** Resolves a scenario path given in a config relative to the config file's folder. */
export function scenarioPathFromConfig(configFile: string, scenarioPath: string): string {
  return resolvePath(dirname(configFile), scenarioPath);
}

export interface ChannelUse {
  readonly channel: number;
  /** Sensor id, or "tach". */
  readonly id: string;
  /** In words: bearing and direction, or the tach pulse's levels. */
  readonly what: string;
}

/** What each channel of the simulated board carries, in channel order. */
export function channelMap(plan: SimPlan, cfg: Config): ChannelUse[] {
  return [
    ...plan.sensors.map((s) => ({
      channel: s.channel,
      id: s.id,
      what: `${cfg.sensors.find((x) => x.id === s.id)!.bearing} ${s.place.direction}`,
    })),
    {
      channel: plan.tach.channel,
      id: 'tach',
      what: `once-per-turn pulse ${plan.tach.low_v}-${plan.tach.high_v} V`,
    },
  ].sort((a, b) => a.channel - b.channel);
}
