/**
 * The sysfs GPIO numbering. Newer kernels number lines from a dynamic base per chip (seen: 512 on
 * Pi 4-class boards, 571 on the Pi 5), so a global line number is the chip's base plus the line's
 * offset on the chip, read at start-up from /sys/class/gpio/gpiochip<N>/{base,label,ngpio}.
 */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { UserError } from '../../agent/errors.js';

export const SYSFS_GPIO_ROOT = '/sys/class/gpio';

export interface GpioChip {
  /** Directory name, e.g. gpiochip512. */
  readonly name: string;
  readonly base: number;
  readonly label: string;
  readonly ngpio: number;
}

/**
 * Labels of the chips that carry the 40-pin header of Raspberry Pi boards (from memory of the
 * kernel device trees: BCM2835/2836/2837 boards, BCM2711 on the Pi 4, RP1 on the Pi 5). Used only
 * when several chips exist and no label is configured.
 */
/** The config key that chooses the chip (agent/config/gpio.ts); errors name it. */
export const CHIP_LABEL_KEY = 'gpio.chip_label';

export const HEADER_CHIP_LABELS: readonly string[] = [
  'pinctrl-rp1',
  'pinctrl-bcm2711',
  'pinctrl-bcm2835',
];

/** Reads every gpiochip under `root`. Missing root: empty list. Unreadable entries are skipped. */
export function readGpioChips(root = SYSFS_GPIO_ROOT): GpioChip[] {
  let names: string[];
  try {
    names = readdirSync(root).filter((n) => /^gpiochip\d+$/.test(n));
  } catch {
    return [];
  }
  const chips: GpioChip[] = [];
  for (const name of names) {
    try {
      const read = (f: string) => readFileSync(join(root, name, f), 'utf8').trim();
      const base = Number(read('base'));
      const ngpio = Number(read('ngpio'));
      if (!Number.isInteger(base) || !Number.isInteger(ngpio)) continue;
      chips.push({ name, base, label: read('label'), ngpio });
    } catch {
      // A chip directory without the expected files is not usable; skip it.
    }
  }
  return chips.sort((a, b) => a.base - b.base);
}

function describe(chips: readonly GpioChip[]): string {
  return chips.map((c) => `${c.name} "${c.label}" (base ${c.base}, ${c.ngpio} lines)`).join('; ');
}

/**
 * Picks the chip the configured line offsets refer to: the one with `label` when given; else the
 * only chip; else a known Raspberry Pi header chip. Throws UserError listing what exists otherwise.
 */
export function pickGpioChip(
  chips: readonly GpioChip[],
  label?: string,
  root = SYSFS_GPIO_ROOT,
): GpioChip {
  if (chips.length === 0) {
    throw new UserError(
      root,
      'no GPIO chips found (the sysfs GPIO interface is missing or not enabled in this kernel)',
      'run on the board, or check that CONFIG_GPIO_SYSFS ' +
        'is enabled; on a laptop use the fake GPIO lines',
    );
  }
  if (label !== undefined) {
    const hit = chips.filter((c) => c.label === label);
    if (hit.length === 1) return hit[0]!;
    throw new UserError(
      `${CHIP_LABEL_KEY} "${label}"`,
      hit.length === 0
        ? `no GPIO chip labelled "${label}"; chips present: ${describe(chips)}`
        : `${hit.length} GPIO chips are labelled "${label}": ${describe(hit)}`,
      hit.length === 0
        ? `set ${CHIP_LABEL_KEY} in the config to one of the labels listed`
        : `${CHIP_LABEL_KEY} cannot tell chips with the same label ` +
            `apart; wire the lines to a chip whose label is unique`,
    );
  }
  if (chips.length === 1) return chips[0]!;
  for (const l of HEADER_CHIP_LABELS) {
    const hit = chips.filter((c) => c.label === l);
    if (hit.length === 1) return hit[0]!;
  }
  throw new UserError(
    root,
    `several GPIO chips and none is known to carry the pin header: ${describe(chips)}`,
    `set ${CHIP_LABEL_KEY} in the config to the label of the chip your relay, ` +
      `lamp, button and GPIO tach input are wired to (one of the labels listed)`,
  );
}

/**
 * Global sysfs number of line `offset` on `chip`; throws UserError when the chip has no such line.
 */
export function globalLineNumber(chip: GpioChip, offset: number, what: string): number {
  if (!Number.isInteger(offset) || offset < 0 || offset >= chip.ngpio) {
    throw new UserError(
      what,
      `line ${offset} does not exist on ${chip.name} "${chip.label}" (lines 0-${chip.ngpio - 1})`,
      'give the line offset on the chip (for a Raspberry ' +
        'Pi: the BCM GPIO number), not the header pin number',
    );
  }
  return chip.base + offset;
}
