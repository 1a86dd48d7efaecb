import { advisorySettings } from '../advisory/advisory.js';
import type { Config } from '../config/schema.js';
import { UserError } from '../errors.js';
import { resolveWatcherSettings } from '../watcher/settings.js';

/**
 * The checks across config sections that `turnwise run` makes at start, without opening anything:
 * the watcher's sensor ids, bearings and levels against the sensors and limits, the advisory's
 * sensor ids, the orders the DSP must resolve. `turnwise check-config` runs the same function, so a
 * config it accepts is not refused by `run` for these reasons. Throws UserError naming the path.
 */
export function startChecks(cfg: Config): void {
  resolveWatcherSettings(cfg);
  if (cfg.advisory) advisorySettings(cfg.advisory, cfg.sensors);
  const orders = new Set(cfg.dsp.orders);
  if (cfg.machine.blades) orders.add(cfg.machine.blades);
  const maxOrder = Math.max(...orders);
  if (2 * maxOrder >= cfg.dsp.resample_points) {
    throw new UserError(
      'dsp.resample_points',
      `${cfg.dsp.resample_points} points per revolution cannot resolve order ` +
        `${maxOrder}${cfg.machine.blades === maxOrder ? ' (blade pass, machine.blades)' : ''}`,
      `raise dsp.resample_points above ${2 * maxOrder}`,
    );
  }
}
