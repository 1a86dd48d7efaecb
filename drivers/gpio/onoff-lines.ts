/**
 * GpioLines on the kernel's sysfs GPIO interface through onoff. Kept thin so a character-device
 * implementation can replace it (onoff's maintainer has declined to move off sysfs).
 *
 * onoff (and its native epoll addon) is imported only inside `OnoffLines.open()`, so a laptop
 * without GPIO, or without the addon built, can load every module of the agent.
 *
 * Active-low is applied here, not through the kernel's active_low attribute: the line is always
 * configured and driven by its physical level, so "high"/"low" at export, edges and values mean
 * the same thing on every kernel.
 */
import type {
  BinaryValue,
  Direction,
  Edge,
  Gpio as OnoffGpio,
  Options as OnoffOptions,
} from 'onoff';
import { UserError } from '../../agent/errors.js';
import type { Logger } from '../../agent/log.js';
import {
  globalLineNumber,
  pickGpioChip,
  readGpioChips,
  SYSFS_GPIO_ROOT,
  type GpioChip,
} from './sysfs-chips.js';
import type { DigitalInput, DigitalOutput, EdgeListener, GpioLines } from './types.js';

/** The part of onoff's Gpio class this adapter uses (tests pass a stand-in). */
export type GpioClass = new (
  gpio: number,
  direction: Direction,
  edge?: Edge,
  options?: OnoffOptions,
) => Pick<OnoffGpio, 'read' | 'write' | 'watch' | 'unwatch' | 'unexport'>;

export interface OnoffLinesOptions {
  /**
   * Label of the GPIO chip the line offsets refer to (e.g. "pinctrl-bcm2711"); see pickGpioChip.
   */
  readonly chipLabel?: string;
  readonly sysfsRoot?: string;
  readonly log: Logger;
  readonly nowMs?: () => number;
}

/** Turns an export/configure failure into a message that says what to do. */
export function explainGpioError(
  err: unknown,
  name: string,
  offset: number,
  global: number,
  chip: GpioChip,
): UserError {
  const e = err as NodeJS.ErrnoException;
  const where =
    `GPIO "${name}" (line ${offset} on ` + `${chip.name} "${chip.label}", sysfs number ${global})`;
  switch (e?.code) {
    case 'EACCES':
    case 'EPERM':
      return new UserError(
        where,
        `permission denied on the sysfs GPIO files (${e.message})`,
        'add the service user to the gpio group (sudo usermod -aG gpio USER, then ' +
          'restart the service) or install the udev rule deploy/udev/99-turnwise-gpio.rules',
      );
    case 'EINVAL':
      return new UserError(
        where,
        `the kernel refused GPIO number ${global} (${e.message})`,
        'check the chip label and the line offset; numbers are ' +
          'chip base + offset and the base changes between kernels',
      );
    case 'EBUSY':
      return new UserError(
        where,
        `the line is already in use by a kernel driver or another program (${e.message})`,
        'free the line (see `cat /sys/kernel/debug/gpio` as root) or wire to another line',
      );
    case 'ENOENT':
      return new UserError(
        where,
        `the sysfs GPIO files are missing (${e.message})`,
        'this kernel may not have CONFIG_GPIO_SYSFS; use a character-device GPIO implementation',
      );
    default:
      return new UserError(
        where,
        `cannot set up the line: ${e?.message ?? String(err)}`,
        'check the wiring configuration and the kernel log (dmesg)',
      );
  }
}

const physicalEdge = (edge: 'rising' | 'falling' | 'both', activeLow: boolean): Edge =>
  !activeLow || edge === 'both' ? edge : edge === 'rising' ? 'falling' : 'rising';

export class OnoffLines implements GpioLines {
  private readonly nowMs: () => number;

  constructor(
    private readonly Gpio: GpioClass,
    readonly chip: GpioChip,
    private readonly log: Logger,
    nowMs?: () => number,
  ) {
    this.nowMs = nowMs ?? Date.now;
  }

  /** Finds the chip, loads onoff, and returns the lines. Throws UserError saying what to do. */
  static async open(opts: OnoffLinesOptions): Promise<OnoffLines> {
    const root = opts.sysfsRoot ?? SYSFS_GPIO_ROOT;
    const chip = pickGpioChip(readGpioChips(root), opts.chipLabel, root);
    let mod: typeof import('onoff');
    try {
      mod = await import('onoff');
    } catch (e) {
      throw new UserError(
        'GPIO',
        `the onoff module could not be loaded (${(e as Error).message})`,
        'on the board install build tools (build-essential, python3) and run ' +
          '`npm rebuild epoll`; on a machine without GPIO use the fake lines',
      );
    }
    opts.log.info(
      { chip: chip.name, label: chip.label, base: chip.base },
      `GPIO: using ${chip.name} "${chip.label}", base ${chip.base}`,
    );
    return new OnoffLines(mod.Gpio, chip, opts.log, opts.nowMs);
  }

  private make(
    name: string,
    offset: number,
    direction: Direction,
    edge?: Edge,
    options?: OnoffOptions,
  ) {
    const global = globalLineNumber(this.chip, offset, `GPIO "${name}"`);
    try {
      return new this.Gpio(global, direction, edge, options);
    } catch (e) {
      throw explainGpioError(e, name, offset, global, this.chip);
    }
  }

  async output(
    name: string,
    line: number,
    opts: { activeLow?: boolean; initial?: boolean } = {},
  ): Promise<DigitalOutput> {
    const activeLow = opts.activeLow ?? false;
    const level = (on: boolean): BinaryValue => (on !== activeLow ? 1 : 0);
    // Export straight into the wanted level ("high"/"low" set direction and value together).
    const g = this.make(name, line, level(opts.initial ?? false) ? 'high' : 'low');
    return {
      write: (on) => g.write(level(on)),
      read: async () => ((await g.read()) === 1) !== activeLow,
      // Not unexported: an unexported line may float (see DigitalOutput.close). The next start
      // finds it exported and drives it again.
      close: async () => {},
    };
  }

  async input(
    name: string,
    line: number,
    opts: { activeLow?: boolean; debounceMs?: number; edge?: 'rising' | 'falling' | 'both' } = {},
  ): Promise<DigitalInput> {
    const activeLow = opts.activeLow ?? false;
    const g = this.make(
      name,
      line,
      'in',
      physicalEdge(opts.edge ?? 'both', activeLow),
      opts.debounceMs ? { debounceTimeout: opts.debounceMs } : undefined,
    );
    return {
      read: async () => ((await g.read()) === 1) !== activeLow,
      watch: (listener: EdgeListener) => {
        const cb = (err: Error | null | undefined, value: BinaryValue) => {
          if (err) {
            this.log.error({ gpio: name, err: err.message }, `GPIO "${name}": ${err.message}`);
            return;
          }
          listener((value === 1) !== activeLow, this.nowMs());
        };
        g.watch(cb);
        return () => g.unwatch(cb);
      },
      close: async () => g.unexport(),
    };
  }
}
