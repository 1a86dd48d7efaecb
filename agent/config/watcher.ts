import { z } from 'zod';

/**
 * `watcher:` section: severity limits, alarm timing, unbalance-signature thresholds, sensor health,
 * history and trend. Every key is defaulted, so configs without this section stay valid.
 * Defaults marked "common practice" are rules of the trade; the standards' values live in
 * agent/watcher/limits.ts.
 */

const mmS = z.number().positive().max(1000);

const limitsSchema = z
  .discriminatedUnion('source', [
    z
      .object({ source: z.literal('iso20816') })
      .strict()
      .describe('ISO 20816-3 zone boundaries from machine.group and machine.support.'),
    z
      .object({
        source: z.literal('iso14694'),
        category: z.enum(['BV-3', 'BV-4']).describe('ISO 14694 fan application category.'),
        mounting: z
          .enum(['rigid', 'flexible'])
          .optional()
          .describe('ISO 14694 mounting; default machine.support.'),
      })
      .strict()
      .describe(
        'ISO 14694 in-situ limits (values from memory): zone A up to the start-up ' +
          'limit, B up to the alarm limit, C up to the shut-down limit, D above.',
      ),
    z
      .object({
        source: z.literal('custom'),
        ab_mm_s: mmS.describe('Upper limit of zone A, mm/s r.m.s.'),
        bc_mm_s: mmS.describe('Upper limit of zone B, mm/s r.m.s.'),
        cd_mm_s: mmS.describe('Upper limit of zone C, mm/s r.m.s.'),
      })
      .strict()
      .refine((l) => l.ab_mm_s < l.bc_mm_s && l.bc_mm_s < l.cd_mm_s, {
        message: 'ab_mm_s < bc_mm_s < cd_mm_s is required',
        path: ['ab_mm_s'],
      }),
  ])
  .prefault({ source: 'iso20816' });

const baselineChannelSchema = z
  .object({
    one_x_rms_mm_s: z
      .number()
      .min(0)
      .max(1000)
      .describe('1x velocity r.m.s. at commissioning, mm/s.'),
    one_x_phase_deg: z
      .number()
      .min(-360)
      .max(360)
      .describe(
        '1x phase lag at commissioning, degrees, as measured (mounting angle not subtracted).',
      ),
    overall_rms_mm_s: z
      .number()
      .min(0)
      .max(1000)
      .optional()
      .describe(
        'Overall velocity r.m.s. at commissioning, mm/s; enables the ISO 20816-3 baseline alarm.',
      ),
  })
  .strict();

export const watcherSchema = z
  .object({
    limits: limitsSchema,
    baseline_alarm: z
      .boolean()
      .default(true)
      .describe(
        'Once a baseline exists, alarm at baseline + 0.25 x (B/C), capped at 1.25 x (B/C) ' +
          '(ISO 20816-3 practice). Without a baseline the alarm sits at the B/C boundary.',
      ),
    hysteresis_share: z
      .number()
      .min(0)
      .max(0.5)
      .default(0.05)
      .describe('A zone is left downwards only once the value is this share below the boundary.'),
    on_delay_s: z
      .number()
      .min(0)
      .max(3600)
      .default(2)
      .describe(
        'A new zone, alarm, verdict or sensor state must hold this long (seconds of ' +
          'measured data) before it is reported. Timed from the start of the first ' +
          'window that showed it, so with 2 s windows the default confirms on one window ' +
          '(about 50 revolutions); set it above window_s to need two windows that agree. ' +
          'Machinery-protection practice uses about 1-3 s (API 670, from memory).',
      ),
    window_s: z
      .number()
      .min(1)
      .max(600)
      .default(2)
      .describe(
        'Length of one analysis window for the live agent, ' +
          'seconds (about 50 revolutions at 1485 r/min).',
      ),
    min_speed_share: z
      .number()
      .min(0)
      .max(1)
      .default(0.8)
      .describe(
        'Below this share of machine.rated_rpm the fan counts ' +
          'as starting or coasting down (see below_min_speed).',
      ),
    max_speed_share: z
      .number()
      .min(1)
      .max(2)
      .default(1.1)
      .describe('Above this share of machine.rated_rpm the speed is out of range.'),
    below_min_speed: z
      .enum(['inhibit', 'raise'])
      .default('inhibit')
      .describe(
        'Below min_speed_share: "inhibit" holds the zones and ' +
          'alarms; "raise" multiplies the limits by startup_multiplier.',
      ),
    startup_multiplier: z
      .number()
      .min(1)
      .max(5)
      .default(2)
      .describe(
        'Limit multiplier during start-up when below_min_speed is "raise" ' +
          '(machinery-protection practice uses 2 or 3, from memory).',
      ),
    vector_change_mm_s: mmS
      .optional()
      .describe(
        'Size of the 1x vector change from baseline that ' +
          'is reported, mm/s r.m.s. Default 0.25 x (B/C).',
      ),
    unbalance: z
      .object({
        bearings: z
          .tuple([z.string().min(1), z.string().min(1)])
          .optional()
          .describe(
            'The two rotor bearings compared for static/couple ' +
              '(default: the first two bearings with radial sensors).',
          ),
        coupling: z
          .object({
            driver: z
              .string()
              .min(1)
              .describe(
                'Bearing on the driver (motor) side of the coupling, with an axial sensor.',
              ),
            driven: z
              .string()
              .min(1)
              .describe('Bearing on the driven (fan) side of the coupling, with an axial sensor.'),
          })
          .strict()
          .optional()
          .describe(
            'The bearings either side of the coupling. Misalignment is read ' +
              'from high 2x with axial 1x about 180 deg apart across them (common ' +
              'practice); without them it cannot be told from a bent shaft.',
          ),
        min_one_x_rms_mm_s: mmS
          .optional()
          .describe(
            '1x below this (mm/s r.m.s.) is too small to judge. Default half the A/B boundary.',
          ),
        one_x_share_min: z
          .number()
          .min(0)
          .max(1)
          .default(0.7)
          .describe('1x must be at least this share of the overall r.m.s. (0.7 = half the power).'),
        two_x_ratio_max: z
          .number()
          .positive()
          .max(5)
          .default(0.5)
          .describe('2x/1x at or above this points to misalignment.'),
        harmonic_ratio: z
          .number()
          .positive()
          .max(1)
          .default(0.2)
          .describe('A harmonic counts as present at this share of 1x.'),
        hv_ratio_max: z
          .number()
          .min(1)
          .max(20)
          .default(3)
          .describe('H/V 1x amplitude ratio above this points away from unbalance.'),
        phase_tolerance_deg: z
          .number()
          .min(5)
          .max(60)
          .default(30)
          .describe('Tolerance on "about 90", "near 0" and "near 180" phase relations, degrees.'),
        axial_ratio_high: z
          .number()
          .positive()
          .max(5)
          .default(0.5)
          .describe('Axial 1x at or above this share of the radial 1x counts as high.'),
        phase_stability_deg: z
          .number()
          .min(5)
          .max(90)
          .default(30)
          .describe(
            '1x phase jumping more than this (median, window to window) is unstable; a ' +
              'baseline is learned only when the phase stays within this of its mean, degrees.',
          ),
        stability_windows: z
          .number()
          .int()
          .min(3)
          .max(100)
          .default(6)
          .describe('Recent windows used for the phase-stability rule.'),
        significance: z
          .discriminatedUnion('basis', [
            z
              .object({ basis: z.literal('zone_ab') })
              .strict()
              .describe(
                "Significant once an OK sensor's overall is above " +
                  'the A/B boundary in force (ISO 20816-3 zone A/B).',
              ),
            z
              .object({ basis: z.literal('baseline_change') })
              .strict()
              .describe(
                'Significant once an overall is 0.25 x (B/C) above that ' +
                  "sensor's baseline overall (ISO 20816-3 change criterion); " +
                  'the A/B boundary where there is no baseline overall.',
              ),
            z
              .object({
                basis: z.literal('custom'),
                overall_mm_s: mmS.describe(
                  'Overall, mm/s r.m.s., above which the 1x is judged; at most the C/D boundary.',
                ),
              })
              .strict()
              .describe("The user's own level."),
          ])
          .prefault({ basis: 'zone_ab' })
          .describe(
            'No unbalance finding (kind none, the residual pattern as ' +
              'information) while every OK sensor is at or below this level ' +
              'and no 1x vector changed significantly from the baseline.',
          ),
      })
      .strict()
      .prefault({}),
    sensor_health: z
      .object({
        flat_ac_rms_v: z
          .number()
          .positive()
          .default(0.0002)
          .describe(
            'Raw signal r.m.s. below this while the fan runs ' +
              'is a flat line (dead sensor or cable), volts.',
          ),
        clipped_share_max: z
          .number()
          .min(0)
          .max(1)
          .default(0.0001)
          .describe('Share of clipped samples above which the channel is not OK.'),
        running_overall_mm_s: mmS
          .default(0.2)
          .describe(
            'Overall above this on any healthy channel means ' +
              'the fan runs (used when there is no speed).',
          ),
        missing_pulse_share_max: z
          .number()
          .min(0)
          .max(1)
          .default(0.1)
          .describe(
            'Share of revolutions with a missing tach pulse above which the tach counts as lost.',
          ),
        spike_ratio: z
          .number()
          .min(3)
          .max(1000)
          .default(8)
          .describe(
            'A 10 ms span whose largest excursion from the mean reaches this many ' +
              'times the median span r.m.s. holds an impulse (Gaussian noise passes ' +
              '5x its r.m.s. in about 6 of 10 million samples: own computation).',
          ),
        spike_one_sided_ratio: z
          .number()
          .min(1.5)
          .max(100)
          .default(3)
          .describe(
            'An impulse is one-sided (no ringing) when its excursion one way ' +
              'is at least this many times the other way; an impact ringing a ' +
              'resonance swings both ways about equally (common practice).',
          ),
        spikes_per_s: z
          .number()
          .positive()
          .max(1000)
          .default(1)
          .describe(
            'One-sided impulses per second (and at least 2 in the window) at ' +
              'or above which the channel is not OK (connector or cable fault).',
          ),
        pile_share_min: z
          .number()
          .positive()
          .max(1)
          .default(0.0002)
          .describe(
            'Share of samples within tolerance of one extreme value ' +
              'at or above which, with few samples just below (see ' +
              'pile_ratio_min), the signal counts as cut off there.',
          ),
        pile_ratio_min: z
          .number()
          .min(1.5)
          .max(1000)
          .default(4)
          .describe(
            'Samples at the extreme over samples in the band just below it: about ' +
              '1.4 for a sine (own computation), far more when the signal is cut off.',
          ),
        saturation_share: z
          .number()
          .min(0.1)
          .max(1)
          .default(0.95)
          .describe(
            'A signal cut off below this share of full_scale_v ' +
              'is the sensor saturating, not the input range.',
          ),
        steps_spanned_min: z
          .number()
          .min(2)
          .max(1e6)
          .default(5)
          .describe(
            'While the fan turns, a signal spanning fewer converter steps than ' +
              'this is quantisation noise only (a converter at rest toggles 1-2 ' +
              'steps either side of its value, 2-4 steps in all: own judgement).',
          ),
        level_step_ratio: z
          .number()
          .min(2)
          .max(1000)
          .default(5)
          .describe(
            'A 100 ms r.m.s. this many times above (or below) the window ' +
              'median, reached by a jump of at least its square root ' +
              'between neighbouring 100 ms groups, is a sudden level step.',
          ),
        ok_after_s: z
          .number()
          .min(0)
          .max(86400)
          .default(10)
          .describe(
            'A sensor fault must be gone this long (seconds of measured data) before the ' +
              'sensor is OK again and sensor_ok is sent; an intermittent connector comes ' +
              'and goes, so this is longer than on_delay_s (own choice: five 2 s windows).',
          ),
      })
      .strict()
      .prefault({}),
    history: z
      .object({
        interval_s: z
          .number()
          .min(1)
          .max(86400)
          .default(60)
          .describe('One history point per this many seconds (windows in between are averaged).'),
        max_points: z
          .number()
          .int()
          .min(100)
          .max(100000)
          .default(4000)
          .describe('History file bound; older points are merged pairwise when it is reached.'),
      })
      .strict()
      .prefault({}),
    trend: z
      .object({
        min_points: z.number().int().min(4).max(10000).default(12),
        min_span_s: z
          .number()
          .min(0)
          .default(3600)
          .describe('History must span at least this long before a trend is stated, seconds.'),
        span_s: z
          .number()
          .positive()
          .default(604800)
          .describe(
            'The fit uses the history of this many newest seconds (default ' +
              '7 days), and none from before the baseline was learned.',
          ),
        max_points: z
          .number()
          .int()
          .min(10)
          .max(1000)
          .default(200)
          .describe(
            'The history in the span is averaged into at most this ' +
              'many points for the fit (its cost grows with the square).',
          ),
        min_r2: z
          .number()
          .min(0)
          .max(1)
          .default(0.5)
          .describe('Fits explaining less of the variation than this are reported as "no trend".'),
      })
      .strict()
      .prefault({}),
    baseline: z
      .object({
        speed_rpm: z.number().positive().optional(),
        channels: z.record(z.string(), baselineChannelSchema).describe('Per sensor id.'),
      })
      .strict()
      .optional()
      .describe(
        '1x baseline set by hand (instead of learning one). Sensor ids must exist in sensors.',
      ),
  })
  .strict()
  .prefault({});

export type WatcherConfig = z.infer<typeof watcherSchema>;
