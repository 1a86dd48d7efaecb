import { numberOption } from './args.js';

/** parseArgs options shared by the commands that run the simulated fan. */
export const simTimingArgs = {
  'from-day': { type: 'string' },
  'time-scale': { type: 'string' },
  seed: { type: 'string' },
} as const;

export interface SimTiming {
  /** Scenario day to start at. */
  readonly fromDay: number;
  /** Scenario seconds per second of signal. */
  readonly timeScale: number;
  /** Overrides the scenario seed. */
  readonly seed: number | undefined;
}

/**
 * Reads --from-day, --time-scale and --seed, with the same limits as the `driver: sim` config keys.
 */
export function parseSimTiming(
  command: string,
  usage: string,
  values: { 'from-day'?: string; 'time-scale'?: string; seed?: string },
): SimTiming {
  return {
    fromDay:
      numberOption(
        command,
        usage,
        'from-day',
        values['from-day'],
        (v) => v >= 0 && v <= 3650,
        'a scenario day from 0 to 3650',
      ) ?? 0,
    timeScale:
      numberOption(
        command,
        usage,
        'time-scale',
        values['time-scale'],
        (v) => v > 0 && v <= 1e6,
        'a factor above 0 (at most 1e6)',
      ) ?? 1,
    seed: numberOption(
      command,
      usage,
      'seed',
      values.seed,
      (v) => Number.isInteger(v) && v >= 0 && v < 2 ** 31,
      'a whole number from 0 to 2^31-1',
    ),
  };
}
