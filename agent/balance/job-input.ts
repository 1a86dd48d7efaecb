/**
 * Reading balancing input files (jobs, split requests, stored coefficients) from JSON, with every
 * mistake reported as a UserError naming the JSON path, what was wrong and what to do.
 */
import { readFileSync } from 'node:fs';
import { z } from 'zod';
import { formatPath, valueAt } from '../config/load.js';
import { UserError } from '../errors.js';
import type { StoredCoefficients } from './coefficients.js';
import type { BalanceJob } from './job.js';

const name = z
  .string()
  .regex(
    /^[A-Za-z0-9][A-Za-z0-9_.-]{0,31}$/,
    'letters, digits, "_", "." or "-", at most 32 characters',
  );
const finite = z.number().refine(Number.isFinite, 'must be a finite number');
const positive = finite.refine((x) => x > 0, 'must be above 0');
const convention = z.enum(['against_rotation', 'with_rotation']);
/** The field types the workbench's requests share with the job files (same words in errors). */
export {
  name as nameField,
  finite as finiteNumber,
  positive as positiveNumber,
  convention as conventionField,
};

const readingSchema = z
  .object({ amp: finite.refine((x) => x >= 0, 'must be 0 or more'), phase_deg: finite })
  .strict();
const weightSchema = z.object({ plane: name, mass_g: positive, angle_deg: finite }).strict();
const runSchema = z
  .object({
    label: z.string().max(64).optional(),
    speed_rpm: positive.optional(),
    weights: z.array(weightSchema),
    readings: z.record(name, readingSchema),
  })
  .strict();
const coefficientSchema = z
  .object({ amp_per_g: finite.refine((x) => x >= 0, 'must be 0 or more'), phase_deg: finite })
  .strict();
export const rotorGeometrySchema = z
  .object({
    rotor: z.enum(['centre_hung', 'overhung']),
    bearing_a_mm: finite,
    bearing_b_mm: finite,
    centre_of_mass_mm: finite,
    planes_mm: z.record(name, finite),
  })
  .strict()
  .describe(
    'Axial positions along the shaft from one datum, mm: the two ' +
      'bearings, the centre of mass and every correction plane.',
  );

export const balanceJobSchema = z
  .object({
    job_id: z
      .string()
      .regex(
        /^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$/,
        'letters, digits, "_", "." or "-", at most 64 characters',
      )
      .optional(),
    asset: z.string().max(64).optional(),
    angle_convention: convention.default('against_rotation'),
    planes: z.array(name).min(1, 'needs at least one plane').max(8, 'at most 8 planes'),
    runs: z.array(runSchema).min(1, 'needs at least the as-found run'),
    amp_unit: z.string().max(16).optional(),
    radius_mm: z.record(name, positive).optional(),
    max_mass_g: z.record(name, positive).optional(),
    rotor_mass_kg: positive.optional(),
    grade_mm_s: positive.optional(),
    influence_coefficients: z.record(name, z.record(name, coefficientSchema)).optional(),
    coefficients_speed_rpm: positive.optional(),
    geometry: rotorGeometrySchema.optional(),
    notes: z.string().max(2000).optional(),
  })
  .strict()
  .superRefine((job, ctx) => {
    if (job.geometry) {
      for (const p of job.planes)
        if (job.geometry.planes_mm[p] === undefined)
          ctx.addIssue({
            code: 'custom',
            path: ['geometry', 'planes_mm'],
            message: `no axial position for plane "${p}"`,
          });
      for (const p of Object.keys(job.geometry.planes_mm))
        if (!job.planes.includes(p))
          ctx.addIssue({
            code: 'custom',
            path: ['geometry', 'planes_mm', p],
            message: `"${p}" is not one of the planes`,
          });
    }
    const planes = new Set<string>();
    job.planes.forEach((p, i) => {
      if (planes.has(p))
        ctx.addIssue({
          code: 'custom',
          path: ['planes', i],
          message: `plane "${p}" is listed twice`,
        });
      planes.add(p);
    });
    const planeList = job.planes.map((p) => `"${p}"`).join(', ');
    const sensors = Object.keys(job.runs[0]?.readings ?? {});
    if (job.runs[0] && sensors.length === 0)
      ctx.addIssue({
        code: 'custom',
        path: ['runs', 0, 'readings'],
        message: 'the as-found run has no readings',
      });
    if (job.runs[0] && job.runs[0].weights.length > 0) {
      ctx.addIssue({
        code: 'custom',
        path: ['runs', 0, 'weights'],
        message:
          'the first run is the rotor as found, so it lists ' +
          'no weights (later runs list weights relative to it)',
      });
    }
    job.runs.forEach((run, j) => {
      run.weights.forEach((w, i) => {
        if (!planes.has(w.plane))
          ctx.addIssue({
            code: 'custom',
            path: ['runs', j, 'weights', i, 'plane'],
            message: `"${w.plane}" is not one of the planes (${planeList})`,
          });
      });
      if (j === 0) return;
      for (const s of sensors) {
        if (!(s in run.readings))
          ctx.addIssue({
            code: 'custom',
            path: ['runs', j, 'readings'],
            message:
              `sensor "${s}" is read in the as-found run but ` +
              `missing here; every run needs the same sensors`,
          });
      }
      for (const s of Object.keys(run.readings)) {
        if (!sensors.includes(s))
          ctx.addIssue({
            code: 'custom',
            path: ['runs', j, 'readings', s],
            message:
              `sensor "${s}" is not read in the as-found ` +
              `run; every run needs the same sensors`,
          });
      }
    });
    for (const key of ['radius_mm', 'max_mass_g'] as const) {
      for (const p of Object.keys(job[key] ?? {})) {
        if (!planes.has(p))
          ctx.addIssue({
            code: 'custom',
            path: [key, p],
            message: `"${p}" is not one of the planes (${planeList})`,
          });
      }
    }
    if (job.influence_coefficients) {
      for (const s of sensors) {
        const row = job.influence_coefficients[s];
        if (!row) {
          ctx.addIssue({
            code: 'custom',
            path: ['influence_coefficients'],
            message: `no coefficients for sensor "${s}"`,
          });
          continue;
        }
        for (const p of job.planes) {
          if (!row[p])
            ctx.addIssue({
              code: 'custom',
              path: ['influence_coefficients', s],
              message: `no coefficient for plane "${p}"`,
            });
        }
      }
    }
  });

export const multiSpeedSchema = z
  .object({
    angle_convention: convention.default('against_rotation'),
    planes: z.array(name).min(1, 'needs at least one plane').max(8, 'at most 8 planes'),
    amp_unit: z.string().max(16).optional(),
    radius_mm: z.record(name, positive).optional(),
    max_mass_g: z.record(name, positive).optional(),
    max_residual_share: positive.max(1, 'must be at most 1 (the as-found vibration)').optional(),
    speeds: z
      .array(
        z
          .object({
            speed_rpm: positive,
            weight: positive.optional(),
            label: z.string().max(64).optional(),
            runs: z.array(runSchema).min(1, 'needs at least the as-found run at this speed'),
          })
          .strict(),
      )
      .min(2, 'needs runs at two or more speeds (for one speed use `turnwise balance solve`)')
      .max(20),
    notes: z.string().max(2000).optional(),
  })
  .strict()
  .superRefine((job, ctx) => {
    // Every speed group must be a valid one-speed job with the same sensors.
    const sensors = Object.keys(job.speeds[0]?.runs[0]?.readings ?? {})
      .sort()
      .join(',');
    job.speeds.forEach((g, i) => {
      const res = balanceJobSchema.safeParse({
        angle_convention: job.angle_convention,
        planes: job.planes,
        runs: g.runs,
      });
      if (!res.success)
        for (const iss of res.error.issues)
          ctx.addIssue({ code: 'custom', path: ['speeds', i, ...iss.path], message: iss.message });
      const here = Object.keys(g.runs[0]?.readings ?? {})
        .sort()
        .join(',');
      if (i > 0 && here !== sensors)
        ctx.addIssue({
          code: 'custom',
          path: ['speeds', i, 'runs', 0, 'readings'],
          message:
            `sensors ${here || 'none'} differ from speeds[0]'s ` +
            `${sensors}; every speed needs the same sensors`,
        });
    });
  });

export type MultiSpeedRequest = z.infer<typeof multiSpeedSchema>;

export const splitRequestSchema = z
  .object({
    angle_convention: convention.default('against_rotation'),
    mass_g: positive,
    angle_deg: finite,
    radius_mm: positive.optional(),
    positions: z
      .object({
        count: z
          .number()
          .int('must be a whole number')
          .min(3, 'needs at least 3 positions')
          .max(360),
        first_deg: finite.default(0),
        radius_mm: positive.optional(),
      })
      .strict(),
  })
  .strict()
  .superRefine((r, ctx) => {
    if ((r.radius_mm === undefined) !== (r.positions.radius_mm === undefined)) {
      ctx.addIssue({
        code: 'custom',
        path: [r.radius_mm === undefined ? 'radius_mm' : 'positions'],
        message:
          'give both radius_mm and positions.radius_mm (to move ' +
          "the weight to the positions' radius), or neither",
      });
    }
  });

export type SplitRequest = z.infer<typeof splitRequestSchema>;

/**
 * A split between holes at given angles (any spacing): two holes, or a list to pick the nearest two
 * from.
 */
export const splitHolesRequestSchema = z
  .object({
    angle_convention: convention.default('against_rotation'),
    mass_g: positive,
    angle_deg: finite,
    radius_mm: positive.optional(),
    holes: z
      .object({
        angles_deg: z.array(finite).min(2, 'needs at least two hole angles').max(360),
        radius_mm: positive.optional(),
      })
      .strict(),
  })
  .strict()
  .superRefine((r, ctx) => {
    if ((r.radius_mm === undefined) !== (r.holes.radius_mm === undefined)) {
      ctx.addIssue({
        code: 'custom',
        path: [r.radius_mm === undefined ? 'radius_mm' : 'holes'],
        message:
          'give both radius_mm and holes.radius_mm (to move ' +
          "the weight to the holes' radius), or neither",
      });
    }
  });

export type SplitHolesRequest = z.infer<typeof splitHolesRequestSchema>;

export const combineRequestSchema = z
  .object({
    angle_convention: convention.default('against_rotation'),
    to_radius_mm: positive.optional(),
    weights: z
      .array(
        z.object({ mass_g: positive, angle_deg: finite, radius_mm: positive.optional() }).strict(),
      )
      .min(1, 'needs at least one weight'),
  })
  .strict()
  .superRefine((r, ctx) => {
    const withR = r.weights.filter((w) => w.radius_mm !== undefined).length;
    if (withR !== 0 && withR !== r.weights.length)
      ctx.addIssue({
        code: 'custom',
        path: ['weights'],
        message: 'give radius_mm for every weight or for none',
      });
    if (withR !== 0 && r.to_radius_mm === undefined)
      ctx.addIssue({
        code: 'custom',
        path: ['to_radius_mm'],
        message: 'needed when the weights carry radii',
      });
  });

export type CombineRequest = z.infer<typeof combineRequestSchema>;

export const fourRunSchema = z
  .object({
    angle_convention: convention.default('against_rotation'),
    sensor: name.optional(),
    amp_unit: z.string().max(16).optional(),
    as_found: positive.describe('1x amplitude as found, job unit'),
    trial_mass_g: positive,
    radius_mm: positive.optional(),
    speed_rpm: positive.optional(),
    amp_scatter_pct: positive.max(50).optional(),
    trials: z
      .array(
        z
          .object({ angle_deg: finite, amp: finite.refine((x) => x >= 0, 'must be 0 or more') })
          .strict(),
      )
      .min(
        3,
        'needs the trial weight at three positions (with two, two ' +
          'mirror-image answers fit and the method cannot choose)',
      )
      .max(12, 'at most 12 trial positions'),
    notes: z.string().max(2000).optional(),
  })
  .strict()
  .superRefine((r, ctx) => {
    const angles = r.trials.map((t) => ((t.angle_deg % 360) + 360) % 360);
    // Positions closer than 10 degrees are one position read twice: they add no geometry.
    const distinct: number[] = [];
    for (const a of angles)
      if (!distinct.some((b) => Math.min(Math.abs(a - b), 360 - Math.abs(a - b)) < 10))
        distinct.push(a);
    if (r.trials.length >= 3 && distinct.length < 3) {
      ctx.addIssue({
        code: 'custom',
        path: ['trials'],
        message:
          `the trial positions (${angles.map((a) => a.toFixed(0)).join(', ')} deg) ` +
          `give only ${distinct.length} distinct position(s) at least 10 deg apart; ` +
          `the method needs three, best spread round the rotor (0, 120, 240 deg)`,
      });
    }
  });

export type FourRunRequest = z.infer<typeof fourRunSchema>;

const coefficientEntry = z
  .object({
    amp_mm_s_pk_per_g: finite.refine((x) => x >= 0, 'must be 0 or more'),
    phase_deg: finite,
  })
  .strict();
export const storedCoefficientsSchema = z
  .object({
    version: z.literal(1),
    asset: z.string(),
    saved_at: z.string(),
    job_id: z.string(),
    angle_convention: convention,
    speed_rpm: positive,
    planes: z.array(name).min(1),
    radius_mm: z.record(name, positive).optional(),
    coefficients: z.record(name, z.record(name, coefficientEntry)),
  })
  .strict();

/** Reads and parses a JSON file; UserError naming the file on any failure. */
export function readJsonFile(file: string, what: string): unknown {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    throw new UserError(
      file,
      code === 'ENOENT'
        ? `${what} file not found`
        : `cannot read ${what} file (${code ?? String(e)})`,
      `give the path of a ${what} JSON file`,
    );
  }
  try {
    return JSON.parse(text);
  } catch (e) {
    throw new UserError(
      file,
      `not valid JSON: ${(e as Error).message}`,
      'fix the JSON syntax (quotes, commas, brackets)',
    );
  }
}

function describeFound(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (typeof value === 'string') return JSON.stringify(value);
  if (value !== null && typeof value === 'object')
    return Array.isArray(value) ? 'a list' : 'an object';
  return String(value);
}

/** One line per problem: file, JSON path, what is wrong (and what was found where that helps). */
function formatIssues(file: string, issues: readonly z.core.$ZodIssue[], raw: unknown): string[] {
  return issues.map((iss) => {
    const where = formatPath(iss.path);
    if (iss.code === 'unrecognized_keys')
      return (
        `${file}: ${where}: unknown key(s) ${iss.keys.map((k) => `"${k}"`).join(', ')}; ` +
        `check the spelling against \`turnwise help balance\``
      );
    const found = valueAt(raw, iss.path);
    // Cross-field messages already quote what they found; a refused number is worth repeating.
    if (iss.code === 'custom' && typeof found !== 'number')
      return `${file}: ${where}: ${iss.message}`;
    return `${file}: ${where}: ${iss.message} (found ${describeFound(found)})`;
  });
}

function validate<T>(
  schema: z.ZodType<T>,
  raw: unknown,
  file: string,
  what: string,
  hint: string,
): T {
  const res = schema.safeParse(raw);
  if (!res.success) {
    const lines = formatIssues(file, res.error.issues, raw);
    throw new UserError(
      file,
      `${lines.length} problem(s) in the ${what}:\n  ${lines.join('\n  ')}`,
      hint,
    );
  }
  return res.data;
}

export function parseBalanceJob(raw: unknown, file = 'job'): BalanceJob {
  return validate(
    balanceJobSchema,
    raw,
    file,
    'balancing job',
    'fix the job file; `turnwise help balance` shows the format',
  ) as BalanceJob;
}

export function parseSplitRequest(raw: unknown, file = 'split'): SplitRequest {
  return validate(
    splitRequestSchema,
    raw,
    file,
    'split request',
    'fix the file; `turnwise help balance` shows the format',
  );
}

export function parseSplitHolesRequest(raw: unknown, file = 'split'): SplitHolesRequest {
  return validate(
    splitHolesRequestSchema,
    raw,
    file,
    'split request',
    'fix the file; `turnwise help balance` shows the format',
  );
}

export function parseMultiSpeed(raw: unknown, file = 'multi-speed'): MultiSpeedRequest {
  return validate(
    multiSpeedSchema,
    raw,
    file,
    'multi-speed job',
    'fix the file; `turnwise help balance` shows the format of `balance multi-speed`',
  );
}

export function parseCombineRequest(raw: unknown, file = 'combine'): CombineRequest {
  return validate(
    combineRequestSchema,
    raw,
    file,
    'combine request',
    'fix the file; `turnwise help balance` shows the format',
  );
}

export function parseFourRun(raw: unknown, file = 'four-run'): FourRunRequest {
  return validate(
    fourRunSchema,
    raw,
    file,
    'four-run request',
    'fix the file; `turnwise help balance` shows the format of `balance four-run`',
  );
}

export function parseStoredCoefficients(raw: unknown, file = 'coefficients'): StoredCoefficients {
  return validate(
    storedCoefficientsSchema,
    raw,
    file,
    'stored influence coefficients',
    'give a coefficients file written by `turnwise balance solve --save`',
  ) as StoredCoefficients;
}
