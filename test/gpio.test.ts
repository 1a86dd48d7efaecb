import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { UserError } from '../agent/errors.js';
import { FakeGpioLines } from '../drivers/gpio/fake-lines.js';
import { OnoffLines, explainGpioError, type GpioClass } from '../drivers/gpio/onoff-lines.js';
import {
  globalLineNumber,
  pickGpioChip,
  readGpioChips,
  type GpioChip,
} from '../drivers/gpio/sysfs-chips.js';
import { GpioTachSpeed, PulseSpeed } from '../drivers/gpio/tach-speed.js';
import { MemoryLogger } from '../agent/log.js';
import { openBoardGpio, usesGpio } from '../agent/cli/board-gpio.js';
import { validateConfig } from '../agent/config/load.js';
import type { WindowResult } from '../agent/dsp/types.js';
import { GpioSpeedCheck, judgeGpioSpeed } from '../agent/runtime/gpio-speed-check.js';

const trees: string[] = [];
afterEach(() => {
  for (const t of trees.splice(0)) rmSync(t, { recursive: true, force: true });
});

/** A fake /sys/class/gpio made of real files: gpiochip<N>/{base,label,ngpio}. */
function sysfs(
  chips: { name: string; base?: number | string; label?: string; ngpio?: number | string }[],
): string {
  const root = mkdtempSync(join(tmpdir(), 'tw-sysfs-'));
  trees.push(root);
  writeFileSync(join(root, 'export'), '');
  writeFileSync(join(root, 'unexport'), '');
  for (const c of chips) {
    const d = join(root, c.name);
    mkdirSync(d);
    if (c.base !== undefined) writeFileSync(join(d, 'base'), `${c.base}\n`);
    if (c.label !== undefined) writeFileSync(join(d, 'label'), `${c.label}\n`);
    if (c.ngpio !== undefined) writeFileSync(join(d, 'ngpio'), `${c.ngpio}\n`);
  }
  return root;
}

function thrown(fn: () => unknown): UserError {
  try {
    fn();
  } catch (e) {
    expect(e).toBeInstanceOf(UserError);
    return e as UserError;
  }
  throw new Error('expected a UserError');
}

describe('sysfs GPIO chip and dynamic base', () => {
  // Chip layouts as seen on Raspberry Pi kernels (base 512 on Pi 4-class, 571 on Pi 5: shared
  // ecosystem notes; labels and line counts from memory).
  it('adds the dynamic base of a Pi 4-class kernel (base 512)', () => {
    const root = sysfs([
      { name: 'gpiochip512', base: 512, label: 'pinctrl-bcm2711', ngpio: 58 },
      { name: 'gpiochip570', base: 570, label: 'raspberrypi-exp-gpio', ngpio: 8 },
    ]);
    const chips = readGpioChips(root);
    expect(chips.map((c) => c.name)).toEqual(['gpiochip512', 'gpiochip570']);
    const chip = pickGpioChip(chips, undefined, root);
    expect(chip.label).toBe('pinctrl-bcm2711');
    expect(globalLineNumber(chip, 17, 'relay')).toBe(529);
  });

  it('adds the dynamic base of a Pi 5 kernel (base 571 on the RP1 chip)', () => {
    const root = sysfs([
      { name: 'gpiochip512', base: 512, label: 'gpio-brcmstb@107d508500', ngpio: 32 },
      { name: 'gpiochip544', base: 544, label: 'gpio-brcmstb@107d508520', ngpio: 15 },
      { name: 'gpiochip571', base: 571, label: 'pinctrl-rp1', ngpio: 54 },
    ]);
    const chip = pickGpioChip(readGpioChips(root), undefined, root);
    expect(chip.name).toBe('gpiochip571');
    expect(globalLineNumber(chip, 17, 'relay')).toBe(588);
  });

  it('uses base 0 on an older kernel with one chip', () => {
    const root = sysfs([{ name: 'gpiochip0', base: 0, label: 'pinctrl-bcm2835', ngpio: 54 }]);
    expect(globalLineNumber(pickGpioChip(readGpioChips(root), undefined, root), 17, 'relay')).toBe(
      17,
    );
  });

  it('picks by configured label, and lists the chips when the label is wrong', () => {
    const root = sysfs([
      { name: 'gpiochip0', base: 0, label: 'board-io', ngpio: 32 },
      { name: 'gpiochip32', base: 32, label: 'expander', ngpio: 16 },
    ]);
    const chips = readGpioChips(root);
    expect(pickGpioChip(chips, 'expander', root).base).toBe(32);
    const e = thrown(() => pickGpioChip(chips, 'pinctrl-rp1', root));
    expect(e.message).toMatch(
      /no GPIO chip labelled "pinctrl-rp1"; chips present: gpiochip0 "board-io" \(base 0, 32 lines\); gpiochip32 "expander"/,
    );
    // The hints name the config key that chooses the chip.
    expect(e.where).toBe('gpio.chip_label "pinctrl-rp1"');
    expect(e.hint).toBe('set gpio.chip_label in the config to one of the labels listed');
    expect(thrown(() => pickGpioChip(chips, undefined, root)).hint).toMatch(
      /^set gpio\.chip_label in the config to the label of the chip your relay, lamp, button and GPIO tach input are wired to/,
    );
  });

  it('refuses a line the chip does not have, saying which lines exist', () => {
    const chip: GpioChip = { name: 'gpiochip512', base: 512, label: 'pinctrl-bcm2711', ngpio: 58 };
    const e = thrown(() => globalLineNumber(chip, 58, 'GPIO "lamp"'));
    expect(e.message).toBe(
      'GPIO "lamp": line 58 does not exist on gpiochip512 "pinctrl-bcm2711" (lines 0-57)',
    );
    expect(e.hint).toMatch(/BCM GPIO number\), not the header pin number/);
  });

  it('says when there is no sysfs GPIO at all, and skips malformed chip entries', () => {
    expect(readGpioChips('/nonexistent/sys/class/gpio')).toEqual([]);
    expect(thrown(() => pickGpioChip([], undefined, '/nonexistent')).message).toMatch(
      /no GPIO chips found/,
    );
    const root = sysfs([
      { name: 'gpiochip0', base: 'x', label: 'a', ngpio: 8 },
      { name: 'gpiochip8', label: 'b' },
      { name: 'gpiochip9', base: 9, label: 'ok', ngpio: 4 },
    ]);
    expect(readGpioChips(root).map((c) => c.label)).toEqual(['ok']);
  });
});

/** Stands in for onoff's Gpio class: records how the adapter configures and drives the line. */
function stubGpio(fail?: NodeJS.ErrnoException) {
  const made: {
    n: number;
    direction: string;
    edge: string | undefined;
    options: unknown;
    writes: number[];
    watchers: ((err: Error | null, v: 0 | 1) => void)[];
    level: 0 | 1;
    unexported: boolean;
  }[] = [];
  const Cls = class {
    private readonly rec: (typeof made)[number];
    constructor(n: number, direction: string, edge?: string, options?: unknown) {
      if (fail) throw fail;
      this.rec = {
        n,
        direction,
        edge,
        options,
        writes: [],
        watchers: [],
        level: direction === 'high' ? 1 : 0,
        unexported: false,
      };
      made.push(this.rec);
    }
    read(): Promise<0 | 1> {
      return Promise.resolve(this.rec.level);
    }
    write(v: 0 | 1): Promise<void> {
      this.rec.writes.push(v);
      this.rec.level = v;
      return Promise.resolve();
    }
    watch(cb: (err: Error | null, v: 0 | 1) => void): void {
      this.rec.watchers.push(cb);
    }
    unwatch(cb: (err: Error | null, v: 0 | 1) => void): void {
      this.rec.watchers = this.rec.watchers.filter((w) => w !== cb);
    }
    unexport(): void {
      this.rec.unexported = true;
    }
  };
  return { Gpio: Cls as unknown as GpioClass, made };
}

const PI4: GpioChip = { name: 'gpiochip512', base: 512, label: 'pinctrl-bcm2711', ngpio: 58 };

describe('onoff adapter (against a stand-in for onoff)', () => {
  it('drives outputs by physical level, applying active-low itself', async () => {
    const { Gpio, made } = stubGpio();
    const lines = new OnoffLines(Gpio, PI4, new MemoryLogger(), () => 1234);
    const relay = await lines.output('relay', 17, { initial: false });
    const lamp = await lines.output('lamp', 27, { activeLow: true, initial: false });
    expect(made.map((m) => [m.n, m.direction])).toEqual([
      [529, 'low'],
      [539, 'high'], // active-low and off: the pin sits high
    ]);
    await relay.write(true);
    await lamp.write(true);
    expect(made[0]!.writes).toEqual([1]);
    expect(made[1]!.writes).toEqual([0]);
    expect(await lamp.read()).toBe(true);
    await lamp.close();
    // closing leaves the line driven where it was (an unexported line may float)
    expect(made[1]!.unexported).toBe(false);
    expect(made[1]!.level).toBe(0);
  });

  it('turns an active-low button into logical presses and maps the edge', async () => {
    const { Gpio, made } = stubGpio();
    const lines = new OnoffLines(Gpio, PI4, new MemoryLogger(), () => 5000);
    const button = await lines.input('ack', 22, {
      activeLow: true,
      debounceMs: 30,
      edge: 'rising',
    });
    expect(made[0]).toMatchObject({
      n: 534,
      direction: 'in',
      edge: 'falling',
      options: { debounceTimeout: 30 },
    });
    const seen: [boolean, number][] = [];
    const stop = button.watch((v, t) => seen.push([v, t]));
    made[0]!.watchers[0]!(null, 0); // pin pulled low: pressed
    expect(seen).toEqual([[true, 5000]]);
    stop();
    expect(made[0]!.watchers).toHaveLength(0);
  });

  it('explains EACCES: gpio group or udev rule', async () => {
    const err = Object.assign(
      new Error("EACCES: permission denied, open '/sys/class/gpio/export'"),
      { code: 'EACCES' },
    );
    const lines = new OnoffLines(stubGpio(err).Gpio, PI4, new MemoryLogger());
    const e = await lines.output('relay', 17).then(
      () => null,
      (x: unknown) => x,
    );
    expect(e).toBeInstanceOf(UserError);
    expect((e as UserError).message).toMatch(
      /^GPIO "relay" \(line 17 on gpiochip512 "pinctrl-bcm2711", sysfs number 529\): permission denied/,
    );
    expect((e as UserError).hint).toMatch(
      /add the service user to the gpio group .* or install the udev rule deploy\/udev\/99-turnwise-gpio.rules/,
    );
    expect(
      explainGpioError(Object.assign(new Error('x'), { code: 'EINVAL' }), 'lamp', 4, 516, PI4)
        .message,
    ).toMatch(/refused GPIO number 516/);
    expect(
      explainGpioError(Object.assign(new Error('x'), { code: 'EBUSY' }), 'lamp', 4, 516, PI4)
        .message,
    ).toMatch(/already in use/);
  });

  it('checks the line against the chip before touching onoff', async () => {
    const { Gpio, made } = stubGpio();
    const lines = new OnoffLines(Gpio, PI4, new MemoryLogger());
    await expect(lines.output('relay', 99)).rejects.toThrow(
      /line 99 does not exist on gpiochip512/,
    );
    expect(made).toHaveLength(0);
  });
});

describe('fake GPIO lines', () => {
  it('lets a test press the button and read back outputs with their history', async () => {
    let now = 0;
    const gpio = new FakeGpioLines({ nowMs: () => now });
    const relay = await gpio.output('relay', 17, { initial: false });
    const button = await gpio.input('ack', 22, { edge: 'rising', debounceMs: 30 });
    const presses: number[] = [];
    button.watch((v, t) => presses.push(t));
    now = 10;
    await relay.write(true);
    gpio.press('ack', 20);
    gpio.release('ack', 25);
    expect(presses).toEqual([20]); // rising edge only
    expect(await button.read()).toBe(false);
    expect(gpio.level('relay')).toBe(true);
    expect(gpio.history('relay')).toEqual([
      { on: false, atMs: 0 },
      { on: true, atMs: 10 },
    ]);
  });

  it('refuses a line used twice, use after close, and can break a line', async () => {
    const gpio = new FakeGpioLines();
    const relay = await gpio.output('relay', 17);
    await expect(gpio.output('lamp', 17)).rejects.toThrow(/line 17 is already used by "relay"/);
    gpio.breakLine('relay', Object.assign(new Error('EIO'), { code: 'EIO' }));
    await expect(relay.write(true)).rejects.toThrow('EIO');
    gpio.breakLine('relay', null);
    await relay.write(true);
    await relay.close();
    await expect(relay.write(false)).rejects.toThrow(/closed/);
    await gpio.output('lamp', 17); // free again once closed
  });
});

describe('tach speed from GPIO pulses (speed only)', () => {
  const opts = { pulsesPerRev: 1, minRpm: 30, maxRpm: 6000 };

  it('measures steady speed from pulse intervals', async () => {
    const gpio = new FakeGpioLines();
    const tach = new GpioTachSpeed(
      await gpio.input('tach', 5, { edge: 'rising' }),
      new PulseSpeed(opts),
    );
    const period = 60_000 / 1480; // 1480 r/min
    for (let k = 0; k <= 10; k++) gpio.pulse('tach', 1000 + k * period);
    expect(tach.rpm(1000 + 10 * period + 1)).toBeCloseTo(1480, 9);
    await tach.close();
    expect(gpio.isClosed('tach')).toBe(true);
  });

  it('averages millisecond jitter: only the end edges of the span count', () => {
    const s = new PulseSpeed({ ...opts, averageRevs: 8 });
    const period = 60_000 / 1480;
    const jitter = [0.9, -0.7, 1.0, -1.0, 0.3, -0.4, 0.8, -0.6, 0.2];
    jitter.forEach((j, k) => s.edge(k * period + j));
    // 8 intervals span 8 periods plus (last - first) jitter = 0.2 - 0.9 = -0.7 ms over 324 ms:
    // 0.22 %.
    const rpm = s.rpm(8 * period + 1)!;
    expect(Math.abs(rpm - 1480) / 1480).toBeLessThan(0.0025);
    expect(rpm).toBeCloseTo((60_000 * 8) / (8 * period + 0.2 - 0.9), 9);
  });

  it('ignores double triggers and reports no speed after pulses stop', () => {
    const s = new PulseSpeed(opts);
    const period = 40;
    s.edge(0);
    s.edge(period);
    s.edge(period + 3); // 3 ms later: faster than 6000 r/min, a double trigger
    s.edge(2 * period);
    expect(s.counters.double_triggers).toBe(1);
    expect(s.rpm(2 * period)).toBeCloseTo(60_000 / period, 9);
    expect(s.rpm(2 * period + 2001)).toBeNull(); // slower than 30 r/min: stopped or lost
    s.edge(2 * period + 5000);
    expect(s.counters.dropouts).toBe(1);
    expect(s.rpm(2 * period + 5000)).toBeNull();
    s.edge(2 * period + 5000 + period);
    expect(s.rpm(2 * period + 5000 + period)).toBeCloseTo(60_000 / period, 9);
  });

  it('divides by the pulses per revolution', () => {
    const s = new PulseSpeed({ ...opts, pulsesPerRev: 2 });
    for (let k = 0; k < 5; k++) s.edge(k * 20); // 20 ms between pulses, 2 per turn
    expect(s.rpm(80)).toBeCloseTo(1500, 9);
  });
});

/** A minimal valid config with the given extra sections. */
function cfgWith(extra: Record<string, unknown>) {
  return validateConfig({
    machine: { id: 'kessrow-id3a', group: 2, support: 'rigid' },
    tach: { channel: 2, trigger_v: 2.5 },
    sensors: [
      { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
    ],
    ...extra,
  });
}

describe('GPIO lines for `turnwise run` (gpio.chip_label)', () => {
  const twoChips = () =>
    sysfs([
      { name: 'gpiochip0', base: 0, label: 'board-io', ngpio: 32 },
      { name: 'gpiochip32', base: 32, label: 'expander', ngpio: 16 },
    ]);

  it('opens no GPIO when neither the advisory nor the GPIO tach input is configured', async () => {
    const cfg = cfgWith({ gpio: { chip_label: 'expander' } });
    expect(usesGpio(cfg)).toBe(false);
    expect(
      await openBoardGpio(cfg, new MemoryLogger(), '/nonexistent/sys/class/gpio'),
    ).toBeUndefined();
  });

  it('with several chips and no header chip, tells the user to set gpio.chip_label', async () => {
    const root = twoChips();
    const err = await openBoardGpio(
      cfgWith({ gpio: { tach_speed: { line: 5 } } }),
      new MemoryLogger(),
      root,
    ).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(UserError);
    expect((err as UserError).message).toMatch(
      /several GPIO chips and none is known to carry the pin header: gpiochip0 "board-io" .*gpiochip32 "expander"/,
    );
    expect((err as UserError).hint).toMatch(/set gpio\.chip_label in the config/);
  });

  it('passes gpio.chip_label through to the chip choice', async () => {
    const root = twoChips();
    const log = new MemoryLogger();
    const lines = (await openBoardGpio(
      cfgWith({ advisory: { relay: { line: 3 } }, gpio: { chip_label: 'expander' } }),
      log,
      root,
    )) as OnoffLines;
    expect(lines.chip).toMatchObject({ name: 'gpiochip32', base: 32, label: 'expander' });
    expect(log.lines.some((l) => l.msg === 'GPIO: using gpiochip32 "expander", base 32')).toBe(
      true,
    );
    const wrong = await openBoardGpio(
      cfgWith({ advisory: { relay: { line: 3 } }, gpio: { chip_label: 'pinctrl-rp1' } }),
      log,
      root,
    ).catch((e: unknown) => e);
    expect((wrong as UserError).where).toBe('gpio.chip_label "pinctrl-rp1"');
  });
});

/** A window's speed part as the DSP reports it. */
const speeds = (mean: number | null, min = mean, max = mean) => ({
  speed_rpm: mean,
  speed_min_rpm: min,
  speed_max_rpm: max,
});

describe('GPIO speed as a cross-check of the tach channel (never phase)', () => {
  it('judges agreement against the window speed range widened by the tolerance', () => {
    expect(judgeGpioSpeed(speeds(1485), 1500, 5).state).toBe('agree'); // +1 %
    // 1485 * 1.05 = 1559.25: just inside, just outside.
    expect(judgeGpioSpeed(speeds(1485), 1559, 5).state).toBe('agree');
    expect(judgeGpioSpeed(speeds(1485), 1560, 5)).toMatchObject({
      state: 'mismatch',
      detail: expect.stringMatching(/1560\.0 r\/min, the tach channel 1485\.0 r\/min .*\+5\.1 %/),
    });
    // A fan running up within the window: 1400 to 1485, mean 1440. 1380 is 4.2 % below the mean
    // and inside 1400 * 0.95 = 1330; 1320 is not.
    expect(judgeGpioSpeed(speeds(1440, 1400, 1485), 1380, 5).state).toBe('agree');
    expect(judgeGpioSpeed(speeds(1440, 1400, 1485), 1320, 5).state).toBe('mismatch');
    expect(judgeGpioSpeed(speeds(null), 742, 5)).toMatchObject({
      state: 'tach_lost',
      detail: expect.stringMatching(
        /tach channel gave no speed .* turns at 742\.0 r\/min: check the tach pickup, its cable and tach\.trigger_v/,
      ),
    });
    expect(judgeGpioSpeed(speeds(1485), null, 5)).toMatchObject({
      state: 'gpio_silent',
      detail: expect.stringMatching(/gpio\.tach_speed\.line/),
    });
    expect(judgeGpioSpeed(speeds(null), null, 5)).toEqual({ state: 'stopped', detail: null });
  });

  it('reads pulses from a fake GPIO input, warns once per burst when the tach channel is lost, and counts', async () => {
    let now = 0;
    const gpio = new FakeGpioLines({ nowMs: () => now });
    const log = new MemoryLogger();
    const cfg = cfgWith({ gpio: { tach_speed: { line: 23, tolerance_pct: 3 } } });
    const check = await GpioSpeedCheck.open({
      config: cfg.gpio!.tach_speed!,
      tach: cfg.tach,
      gpio,
      log,
      nowMs: () => now,
    });
    const period = 60_000 / 1485;
    let k = 0;
    const window = (tachRpm: number | null, seconds = 2) => {
      const until = now + seconds * 1000;
      for (; k * period <= until; k++) gpio.pulse('gpio tach', k * period);
      now = until;
      return check.onWindow({ ...speeds(tachRpm), end_index: now } as unknown as WindowResult);
    };
    expect(check.health()).toMatchObject({
      gpio_speed_check: null,
      gpio_speed_disagreements_total: 0,
    });
    expect(window(1485).state).toBe('agree');
    expect(check.rpm()).toBeCloseTo(1485, 6);
    // The tach channel loses its pulse for three windows while the GPIO input sees the fan turn.
    expect([window(null), window(null), window(null)].map((v) => v.state)).toEqual([
      'tach_lost',
      'tach_lost',
      'tach_lost',
    ]);
    expect(window(1485).state).toBe('agree');
    const lines = log.lines.filter((l) => l.fields['problem'] === 'gpio_speed_check');
    expect(lines.map((l) => [l.level, l.fields['occurrences'] ?? null])).toEqual([
      ['warn', null],
      ['info', 3],
    ]);
    expect(lines[0]!.fields).toMatchObject({ gpio_speed_rpm: 1485, tach_speed_rpm: null });
    expect(check.health()).toMatchObject({
      gpio_speed_rpm: 1485,
      gpio_speed_check: 'agree',
      gpio_speed_disagreements_total: 3,
      gpio_tach_double_triggers_total: 0,
      gpio_tach_dropouts_total: 0,
    });
    expect(check.health()['gpio_tach_edges_total']).toBe(k);
    // The pickup goes quiet: after 2 s (1 / tach.min_rpm of 30 r/min) the GPIO speed is unknown.
    now += 2500;
    expect(check.health()['gpio_speed_rpm']).toBeNull();
    expect(
      check.onWindow({ ...speeds(1485), end_index: now } as unknown as WindowResult).state,
    ).toBe('gpio_silent');
    await check.close();
    expect(gpio.isClosed('gpio tach')).toBe(true);
  });
});
