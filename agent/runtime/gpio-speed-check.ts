/**
 * The GPIO tach input as a cross-check of the tach channel's speed (`gpio.tach_speed`).
 *
 * Speed only, never phase: a GPIO edge is time-stamped when user space services the interrupt
 * (about a millisecond of jitter, about 9 degrees at 1480 r/min), so nothing here reaches the DSP.
 * Once per analysis window the GPIO speed is compared with the revolution speeds the tach channel
 * measured in that window; a disagreement, a tach channel that lost the pulse while the GPIO input
 * says the fan turns, or a silent GPIO input while the tach channel turns, is logged once per
 * burst.
 */
import { GpioTachSpeed, PulseSpeed } from '../../drivers/gpio/tach-speed.js';
import type { GpioLines } from '../../drivers/gpio/types.js';
import { BurstLog } from '../burst-log.js';
import type { GpioTachSpeedConfig } from '../config/gpio.js';
import type { TachConfig } from '../config/schema.js';
import type { WindowResult } from '../dsp/types.js';
import type { Logger } from '../log.js';

/**
 * agree: both speeds known and within the tolerance; stopped: neither input sees the fan turn;
 * mismatch: both known but too far apart; tach_lost: the tach channel gave no speed while the
 * GPIO input says the fan turns; gpio_silent: the GPIO input gives no speed while the tach channel
 * does.
 */
export type SpeedCheckState = 'agree' | 'stopped' | 'mismatch' | 'tach_lost' | 'gpio_silent';

export interface SpeedVerdict {
  readonly state: SpeedCheckState;
  /** What disagrees and what to check, in words; null when all is well. */
  readonly detail: string | null;
}

const r1 = (x: number) => Math.round(x * 10) / 10;
const f1 = (x: number) => x.toFixed(1);

/**
 * Pure: judges the GPIO speed against a window's tach-channel speeds. The GPIO speed may lie up to
 * `tolerancePct` outside the range of revolution speeds in the window (min to max), so a fan
 * changing speed within the window does not count as a disagreement.
 */
export function judgeGpioSpeed(
  w: Pick<WindowResult, 'speed_rpm' | 'speed_min_rpm' | 'speed_max_rpm'>,
  gpioRpm: number | null,
  tolerancePct: number,
): SpeedVerdict {
  const tach = w.speed_rpm;
  if (tach === null && gpioRpm === null) return { state: 'stopped', detail: null };
  if (tach === null) {
    return {
      state: 'tach_lost',
      detail:
        `the tach channel gave no speed in this window, but the GPIO ` +
        `tach input says the fan turns at ${f1(gpioRpm!)} r/min: ` +
        `check the tach pickup, its cable and tach.trigger_v`,
    };
  }
  if (gpioRpm === null) {
    return {
      state: 'gpio_silent',
      detail:
        `the GPIO tach input gives no speed while the tach channel measures ` +
        `${f1(tach)} r/min: check the GPIO pickup, its wiring and gpio.tach_speed.line`,
    };
  }
  const lo = (w.speed_min_rpm ?? tach) * (1 - tolerancePct / 100);
  const hi = (w.speed_max_rpm ?? tach) * (1 + tolerancePct / 100);
  if (gpioRpm >= lo && gpioRpm <= hi) return { state: 'agree', detail: null };
  const pct = ((gpioRpm - tach) / tach) * 100;
  const range =
    w.speed_min_rpm !== null && w.speed_max_rpm !== null
      ? ` (${f1(w.speed_min_rpm)} to ${f1(w.speed_max_rpm)} r/min in the window)`
      : '';
  return {
    state: 'mismatch',
    detail:
      `the GPIO tach input says ${f1(gpioRpm)} r/min, the tach channel ` +
      `${f1(tach)} r/min${range}: ${pct > 0 ? '+' : ''}${pct.toFixed(1)} %, ` +
      `beyond gpio.tach_speed.tolerance_pct (${tolerancePct} %); check ` +
      `tach.pulses_per_rev, gpio.tach_speed.pulses_per_rev and both pickups`,
  };
}

export interface GpioSpeedCheckOptions {
  readonly config: GpioTachSpeedConfig;
  /** The tach section: its min_rpm/max_rpm are the defaults of the GPIO input's. */
  readonly tach: TachConfig;
  readonly gpio: GpioLines;
  readonly log: Logger;
  /** Wall clock, ms: GPIO edges are time-stamped with it. */
  readonly nowMs: () => number;
}

const PROBLEM = 'gpio_speed_check';

export class GpioSpeedCheck {
  private state: SpeedCheckState | null = null;
  private disagreements = 0;
  private readonly burst: BurstLog;

  private constructor(
    private readonly input: GpioTachSpeed,
    private readonly o: GpioSpeedCheckOptions,
  ) {
    // A burst lasts until the speeds agree again, however long that takes.
    this.burst = new BurstLog(o.log, { quietMs: Infinity, nowMs: o.nowMs });
  }

  /** Opens the input line through GpioLines and starts timing its rising edges. */
  static async open(o: GpioSpeedCheckOptions): Promise<GpioSpeedCheck> {
    const c = o.config;
    const speed = new PulseSpeed({
      pulsesPerRev: c.pulses_per_rev,
      minRpm: c.min_rpm ?? o.tach.min_rpm,
      maxRpm: c.max_rpm ?? o.tach.max_rpm,
      averageRevs: c.average_revs,
    });
    const line = await o.gpio.input('gpio tach', c.line, {
      activeLow: c.active_low,
      edge: 'rising',
    });
    return new GpioSpeedCheck(new GpioTachSpeed(line, speed), o);
  }

  /** GPIO speed now, r/min; null when unknown (no pulses, stopped, lost). */
  rpm(): number | null {
    return this.input.rpm(this.o.nowMs());
  }

  /**
   * Compares with the window just closed; logs the first of a burst of disagreements and when it
   * ends.
   */
  onWindow(w: WindowResult): SpeedVerdict {
    const gpioRpm = this.rpm();
    const v = judgeGpioSpeed(w, gpioRpm, this.o.config.tolerance_pct);
    this.state = v.state;
    const fields = {
      gpio_speed_rpm: gpioRpm === null ? null : r1(gpioRpm),
      tach_speed_rpm: w.speed_rpm === null ? null : r1(w.speed_rpm),
      window_end: w.end_index,
    };
    if (v.detail) {
      this.disagreements++;
      this.burst.report(PROBLEM, v.detail, fields, v.state);
    } else {
      this.burst.resolved(
        PROBLEM,
        `GPIO tach input and tach channel agree again (${v.state})`,
        fields,
      );
    }
    this.burst.flush();
    return v;
  }

  /** Heartbeat fields, prefixed gpio_. */
  health(): Record<string, number | string | null> {
    const rpm = this.rpm();
    const c = this.input.speed.counters;
    return {
      gpio_speed_rpm: rpm === null ? null : r1(rpm),
      gpio_speed_check: this.state,
      gpio_speed_disagreements_total: this.disagreements,
      gpio_tach_edges_total: c.edges,
      gpio_tach_double_triggers_total: c.double_triggers,
      gpio_tach_dropouts_total: c.dropouts,
    };
  }

  async close(): Promise<void> {
    this.burst.flush(true);
    await this.input.close();
  }
}
