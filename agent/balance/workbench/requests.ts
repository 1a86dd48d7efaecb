/**
 * The requests the balancing workbench accepts (the live page's HTTP API bodies and the MQTT
 * `balancing.session` parameters), as zod schemas, and the error every refusal becomes: a status
 * (the HTTP status the live server answers with), a short code, a message naming what was wrong and
 * where, and what to do.
 */
import { z } from 'zod';
import { formatPath, valueAt } from '../../config/load.js';
import {
  conventionField as convention,
  finiteNumber as finite,
  nameField as name,
  positiveNumber as positive,
} from '../job-input.js';

export class ApiError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
    readonly hint: string,
    /** One line per problem, each naming its JSON path. */
    readonly problems: readonly string[] = [],
  ) {
    super(message);
    this.name = 'ApiError';
  }

  body(): Record<string, unknown> {
    return {
      error: {
        code: this.code,
        message: this.message,
        hint: this.hint,
        ...(this.problems.length ? { problems: this.problems } : {}),
      },
    };
  }
}

export const conflict = (message: string, hint: string): ApiError =>
  new ApiError(409, 'conflict', message, hint);
export const badRequest = (message: string, hint: string): ApiError =>
  new ApiError(400, 'invalid_request', message, hint);

const person = z.string().trim().min(1, 'must not be empty').max(64, 'at most 64 characters');
const grade = z.union([
  positive,
  z
    .string()
    .regex(/^\s*G?\s*[0-9]+(\.[0-9]+)?\s*$/i, 'a balance quality grade such as "G6.3" or 6.3'),
]);

export const JOB_KINDS = ['single_plane', 'two_plane', 'static_couple', 'trim'] as const;
export type JobKind = (typeof JOB_KINDS)[number];

const planeSetup = z
  .object({
    name,
    radius_mm: positive,
    max_mass_g: positive.optional(),
    positions: z
      .object({
        count: z
          .number()
          .int('must be a whole number')
          .min(3, 'needs at least 3 positions')
          .max(360),
        first_deg: finite.default(0),
      })
      .strict()
      .optional(),
  })
  .strict();

export const createJobSchema = z
  .object({
    kind: z.enum(JOB_KINDS),
    angle_convention: convention.optional(),
    by: person,
    planes: z
      .array(planeSetup)
      .min(1, 'needs at least one plane')
      .max(2, 'at most two planes')
      .optional(),
    sensors: z.array(name).min(1, 'needs at least one sensor').optional(),
    rotor_mass_kg: positive.optional(),
    bearings: z.number().int('must be a whole number').min(1).max(8).optional(),
    grade: grade.optional(),
    speed_rpm: positive.optional(),
    notes: z.string().max(2000).optional(),
  })
  .strict();
export type CreateJobRequest = z.infer<typeof createJobSchema>;

const weightIn = z
  .object({ plane: name, mass_g: positive, angle_deg: finite, radius_mm: positive.optional() })
  .strict();

export const declareRunSchema = z
  .object({
    purpose: z.enum(['trial', 'check']),
    label: z.string().trim().min(1).max(64).optional(),
    remove: z
      .union([z.literal('all'), z.literal('all_trials'), z.array(z.string().max(16))])
      .default([]),
    add: z.array(weightIn).max(16).default([]),
    acknowledge_cautions: z.boolean().optional(),
    by: person.optional(),
  })
  .strict();
export type DeclareRunRequest = z.infer<typeof declareRunSchema>;

export const captureSchema = z
  .object({
    revolutions: z.number().int('must be a whole number').min(10).max(100000).optional(),
    by: person.optional(),
  })
  .strict();
export const byOnlySchema = z.object({ by: person.optional() }).strict();
export const reasonSchema = z
  .object({ reason: z.string().trim().min(1, 'say why').max(500), by: person.optional() })
  .strict();
export const finishSchema = z
  .object({ note: z.string().max(2000).optional(), by: person.optional() })
  .strict();

export const trialWeightSchema = z
  .object({
    rotor_mass_kg: positive.optional(),
    bearings: z.number().int().min(1).max(8).default(2),
    bearing_load_kg: positive.optional(),
    radius_mm: positive,
    speed_rpm: positive,
    fraction: positive.refine((f) => f <= 0.5, 'at most 0.5 (0.1 is the usual rule)').default(0.1),
  })
  .strict()
  .refine((r) => r.rotor_mass_kg !== undefined || r.bearing_load_kg !== undefined, {
    message: 'give rotor_mass_kg (with bearings) or bearing_load_kg',
    path: ['rotor_mass_kg'],
  });

export const gradeSchema = z
  .object({
    rotor_mass_kg: positive,
    speed_rpm: positive,
    grade,
    residual_g_mm: finite.refine((x) => x >= 0, 'must be 0 or more').optional(),
    planes: z.number().int().min(1).max(8).default(1),
  })
  .strict();

export const moveRadiusSchema = z
  .object({ mass_g: positive, from_radius_mm: positive, to_radius_mm: positive })
  .strict();

function found(v: unknown): string {
  if (v === undefined) return 'nothing';
  if (typeof v === 'string') return JSON.stringify(v.length > 40 ? `${v.slice(0, 40)}...` : v);
  if (v !== null && typeof v === 'object') return Array.isArray(v) ? 'a list' : 'an object';
  return String(v);
}

/** Validates a request body; ApiError 400 listing every problem with its JSON path. */
export function parseBody<T>(schema: z.ZodType<T>, raw: unknown, what: string): T {
  const res = schema.safeParse(raw);
  if (res.success) return res.data;
  const problems = res.error.issues.map((iss) => {
    const where = formatPath(iss.path);
    if (iss.code === 'unrecognized_keys')
      return `${where}: unknown key(s) ${iss.keys.map((k) => `"${k}"`).join(', ')}`;
    return `${where}: ${iss.message} (found ${found(valueAt(raw, iss.path))})`;
  });
  throw new ApiError(
    400,
    'invalid_request',
    `${problems.length} problem(s) in the ${what}: ${problems.join('; ')}`,
    'fix the fields named and send it again; docs/live-page.md, "HTTP API", lists every field',
    problems,
  );
}
