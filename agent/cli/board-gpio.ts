import type { GpioLines } from '../../drivers/gpio/types.js';
import type { Config } from '../config/schema.js';
import type { Logger } from '../log.js';

/** True when the config drives or reads any GPIO line (the advisory, the GPIO tach input). */
export function usesGpio(cfg: Config): boolean {
  return cfg.advisory !== undefined || cfg.gpio?.tach_speed !== undefined;
}

/**
 * The board's GPIO lines for `turnwise run`: opened (sysfs through onoff) only when the config uses
 * GPIO, on the chip named by `gpio.chip_label` when set. Throws UserError naming what to fix.
 */
export async function openBoardGpio(
  cfg: Config,
  log: Logger,
  sysfsRoot?: string,
): Promise<GpioLines | undefined> {
  if (!usesGpio(cfg)) return undefined;
  const { OnoffLines } = await import('../../drivers/gpio/onoff-lines.js');
  return OnoffLines.open({
    log,
    chipLabel: cfg.gpio?.chip_label,
    ...(sysfsRoot !== undefined ? { sysfsRoot } : {}),
  });
}
