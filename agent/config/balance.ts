import { z } from 'zod';

/**
 * `balance:` section: defaults for balancing jobs on this machine. Everything is optional; a job
 * file's own values win over these.
 */
const planeName = z
  .string()
  .regex(
    /^[A-Za-z0-9][A-Za-z0-9_.-]{0,31}$/,
    'letters, digits, "_", "." or "-", at most 32 characters',
  );

export const balancePlaneSchema = z
  .object({
    radius_mm: z.number().positive().describe('Radius the weights of this plane sit at, mm.'),
    max_mass_g: z
      .number()
      .positive()
      .optional()
      .describe('Largest weight this plane can take, g; bigger corrections get a warning.'),
    positions: z
      .object({
        count: z
          .number()
          .int()
          .min(3)
          .max(360)
          .describe('Number of equally spaced fixed positions (blades, bolt holes).'),
        first_deg: z
          .number()
          .default(0)
          .describe('Angle of position 0 from the reference mark, degrees, in angle_convention.'),
      })
      .strict()
      .optional()
      .describe('Fixed positions weights can go on; corrections are split onto them.'),
  })
  .strict();

export const balanceSchema = z
  .object({
    angle_convention: z
      .enum(['against_rotation', 'with_rotation'])
      .default('against_rotation')
      .describe(
        'How weight angles are measured from the reference ' +
          'mark on this machine: against or with rotation.',
      ),
    rotor_mass_kg: z
      .number()
      .positive()
      .optional()
      .describe('Rotor mass, kg (trial-weight suggestion and ISO 21940-11 check).'),
    bearings: z
      .number()
      .int()
      .min(1)
      .max(8)
      .default(2)
      .describe('Bearings carrying the rotor; the trial-weight rule uses the load on one.'),
    grade_mm_s: z
      .number()
      .positive()
      .max(4000)
      .optional()
      .describe('ISO 21940-11 balance quality grade G, mm/s (fans usually 6.3).'),
    planes: z
      .record(planeName, balancePlaneSchema)
      .optional()
      .describe('Correction planes by name.'),
  })
  .strict()
  .optional();

export type BalanceConfig = NonNullable<z.infer<typeof balanceSchema>>;
