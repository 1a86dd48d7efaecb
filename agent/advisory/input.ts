/**
 * What the advisory needs from the watcher, once per analysis window, and nothing more: each
 * channel's severity zone and whether the sensor is judged healthy. The advisory never looks at
 * the watcher's internals, so any stage that can say "zone and OK per channel" can drive it.
 */
export interface AdvisoryChannelInput {
  /** Sensor id from the config (sensors[].id). */
  readonly id: string;
  /** Bearing name from the config (sensors[].bearing); votes are counted per bearing. */
  readonly bearing: string;
  /** ISO 20816-3 zone of the channel's overall velocity in this window; null when not judged. */
  readonly zone: 'A' | 'B' | 'C' | 'D' | null;
  /**
   * False when the sensor or its cable is judged faulty (bias out of window, clipping, flat
   * line ...): it cannot vote.
   */
  readonly ok: boolean;
}

export interface AdvisoryInput {
  /**
   * Time of the end of the window, ms, on a clock that only moves forward while the source runs
   * (the sample clock: end_index / sample_rate_hz * 1000). Hold times are measured on it, so a
   * recording replayed faster than real time behaves as it did in real time.
   */
  readonly t_ms: number;
  readonly channels: readonly AdvisoryChannelInput[];
}
