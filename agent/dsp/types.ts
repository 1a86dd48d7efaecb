import type { SignalFacts } from './signal-facts.js';

/**
 * What the DSP stage hands to the watcher and the outputs: one `WindowResult` per analysis window
 * (a whole recording for `turnwise analyze`, a few seconds of revolutions for the live agent).
 *
 * Units are in the field names. Phase is a lag in degrees, 0-360 of that order's own cycle, from
 * the tach edge (rising through trigger_v) to the positive peak of that order's velocity component.
 */

export interface OrderVector {
  /** Order number: 1 = once per revolution. */
  readonly order: number;
  /** Frequency of this order at the window's mean speed, Hz. */
  readonly freq_hz: number;
  /** Zero-to-peak velocity amplitude, mm/s. */
  readonly amp_pk_mm_s: number;
  /** r.m.s. velocity amplitude, mm/s (= amp_pk / sqrt 2). */
  readonly amp_rms_mm_s: number;
  /** Phase lag, degrees 0-360. */
  readonly phase_deg: number;
}

export interface SpectrumPeak {
  readonly freq_hz: number;
  /** Frequency divided by running speed. */
  readonly order: number;
  readonly amp_rms_mm_s: number;
}

/** Signal-level facts about one channel's raw volts, for sensor-health rules. */
export interface ChannelStats {
  /** Mean of the raw signal, volts (the IEPE bias on DC-coupled inputs). */
  readonly dc_v: number;
  /** r.m.s. about the mean, volts. */
  readonly ac_rms_v: number;
  readonly min_v: number;
  readonly max_v: number;
  /** Samples at or beyond the channel's full scale (0 when full_scale_v is not configured). */
  readonly clipped_samples: number;
  readonly samples: number;
  /**
   * Shape of the signal for the sensor-fault rules (absent in windows written before it existed).
   */
  readonly signal?: SignalFacts;
}

export interface ChannelResult {
  /** Sensor id from the config. */
  readonly id: string;
  readonly channel: number;
  readonly bearing: string;
  readonly direction: 'vertical' | 'horizontal' | 'axial';
  readonly mounting_angle_deg: number;
  /**
   * Broadband velocity r.m.s. in the band of `WindowResult.band_hz`, mm/s; null when no spectrum
   * segment completed.
   */
  readonly overall_rms_mm_s: number | null;
  /**
   * Order vectors keyed by order number as a string ("1", "2", ...); empty when no revolution was
   * averaged.
   */
  readonly orders: Readonly<Record<string, OrderVector>>;
  /** 1x r.m.s. divided by the overall r.m.s. (0-1); null when either is missing. */
  readonly one_x_share: number | null;
  /** Largest spectrum peaks that are not near a whole order of running speed, largest first. */
  readonly nonsync_peaks: readonly SpectrumPeak[];
  readonly stats: ChannelStats;
}

export interface TachSummary {
  /** Rising edges accepted as revolution marks. */
  readonly edges: number;
  /** Intervals judged to hide one or more missing pulses; those revolutions were not averaged. */
  readonly missing_pulses: number;
  /** Edges rejected as double triggers (too soon after the previous one). */
  readonly double_triggers: number;
  /**
   * Min and max of the tach voltage over the window, volts (null when the board timed the tach).
   */
  readonly min_v: number | null;
  readonly max_v: number | null;
}

export interface WindowResult {
  /** Sample-clock index of the window's first and one-past-last sample. */
  readonly start_index: number;
  readonly end_index: number;
  readonly sample_rate_hz: number;
  /** Mean speed over the averaged revolutions, r/min; null when none was averaged. */
  readonly speed_rpm: number | null;
  readonly speed_min_rpm: number | null;
  readonly speed_max_rpm: number | null;
  /** Revolutions averaged into the order vectors. */
  readonly revolutions: number;
  /** Revolutions thrown away (missing pulse, gap, speed outside limits). */
  readonly revolutions_rejected: number;
  /** Band of the overall r.m.s., Hz. */
  readonly band_hz: { readonly low: number; readonly high: number };
  /** Spectrum segments averaged for the overall. */
  readonly spectrum_segments: number;
  readonly spectrum_resolution_hz: number;
  /** Samples lost to gaps reported by the source inside this window. */
  readonly gap_samples: number;
  readonly tach: TachSummary;
  readonly channels: readonly ChannelResult[];
  /** Plain-language warnings about the measurement itself (short record, speed change, ...). */
  readonly warnings: readonly string[];
}

/** The live 1x (and other order) vectors, updated every revolution with exponential forgetting. */
export interface LiveFrame {
  /** Sample-clock index of the newest sample seen. */
  readonly sample_index: number;
  /**
   * Samples per second of that clock (absent in frames made by hand): elapsed sample time between
   * frames, free of wall-clock steps.
   */
  readonly sample_rate_hz?: number;
  /**
   * Speed from the same weighted average of revolution periods, r/min; null before the first
   * revolution.
   */
  readonly speed_rpm: number | null;
  /** Effective number of revolutions in the live average (sum of weights). */
  readonly revolutions_weight: number;
  /** Seconds since the last trusted revolution (large when the tach is lost). */
  readonly age_s: number;
  readonly channels: ReadonlyArray<{
    readonly id: string;
    readonly orders: Readonly<Record<string, OrderVector>>;
  }>;
}
