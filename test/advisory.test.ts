import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import {
  advisorySettings,
  SafeStopAdvisory,
  type AdvisorySettings,
} from '../agent/advisory/advisory.js';
import type { AdvisoryChannelInput, AdvisoryInput } from '../agent/advisory/input.js';
import { LatchFile } from '../agent/advisory/latch-file.js';
import { countVotes } from '../agent/advisory/vote.js';
import { advisorySchema } from '../agent/config/advisory.js';
import { loadConfig } from '../agent/config/load.js';
import { UserError } from '../agent/errors.js';
import type { AgentEvent } from '../agent/events.js';
import { CaptureLog } from './support/capture-log.js';
import { expectNoStack, runCli } from './support/cli.js';
import { FakeGpioLines } from '../drivers/gpio/fake-lines.js';
import { OnoffLines, type GpioClass } from '../drivers/gpio/onoff-lines.js';
import type { GpioChip } from '../drivers/gpio/sysfs-chips.js';
import { releaseAdvisoryOutputs } from '../agent/advisory/release.js';
import { assertMatches } from './support/payload-schemas.js';

const RELAY = 17;
const LAMP = 27;
const BUTTON = 22;
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});
function latchFile(): LatchFile {
  const d = mkdtempSync(join(tmpdir(), 'tw-adv-'));
  dirs.push(d);
  return new LatchFile(join(d, 'advisory.json'));
}

// Default condition: zone D on two OK channels of one bearing for 3 s. Two-channel agreement at one
// bearing and a 1-3 s time delay follow machinery-protection practice (API 670, from memory).
const settings = (over: Partial<AdvisorySettings> = {}): AdvisorySettings => ({
  ...advisorySettings(
    advisorySchema.parse({
      relay: { line: RELAY },
      lamp: { line: LAMP },
      ack_button: { line: BUTTON },
    }),
    loadConfig('config/example.yaml').sensors,
  ),
  ...over,
});

type Z = AdvisoryChannelInput['zone'];
/** One window for the example fan's radial sensors: DE-V, DE-H, NDE-V, NDE-H. */
function win(
  t_s: number,
  z: { deV?: Z; deH?: Z; ndeV?: Z; ndeH?: Z; deVok?: boolean; deHok?: boolean },
): AdvisoryInput {
  return {
    t_ms: t_s * 1000,
    channels: [
      { id: 'DE-V', bearing: 'DE', zone: z.deV ?? 'B', ok: z.deVok ?? true },
      { id: 'DE-H', bearing: 'DE', zone: z.deH ?? 'B', ok: z.deHok ?? true },
      { id: 'NDE-V', bearing: 'NDE', zone: z.ndeV ?? 'A', ok: true },
      { id: 'NDE-H', bearing: 'NDE', zone: z.ndeH ?? 'A', ok: true },
    ],
  };
}

async function startAdvisory(over: Partial<AdvisorySettings> = {}, store = latchFile()) {
  const gpio = new FakeGpioLines();
  const events: AgentEvent[] = [];
  const log = new CaptureLog();
  const adv = await SafeStopAdvisory.start({
    settings: settings(over),
    gpio,
    asset: 'kessrow-id3a',
    emit: (e) => events.push(e),
    store,
    log,
    tickMs: 0,
  });
  await adv.settled();
  return { adv, gpio, events, log, store };
}

describe('vote counting', () => {
  const s = { zone: 'D' as const, minChannels: 2, voters: null };
  it('needs two OK channels of the same bearing in zone D', () => {
    expect(countVotes(win(0, { deV: 'D', deH: 'D' }), s)).toMatchObject({
      met: true,
      bearing: 'DE',
      channels: ['DE-V', 'DE-H'],
    });
    expect(countVotes(win(0, { deV: 'D', deH: 'C' }), s).met).toBe(false);
    // two bearings, one vote each
    expect(countVotes(win(0, { deV: 'D', ndeV: 'D' }), s).met).toBe(false);
  });
  it('never counts a channel that is not OK, and says which bearings cannot vote', () => {
    const v = countVotes(win(0, { deV: 'D', deH: 'D', deHok: false }), s);
    expect(v.met).toBe(false);
    expect(v.bearingsWithoutVote).toEqual(['DE']);
  });
  it('zone C setting counts C and D; the voter list restricts who votes', () => {
    expect(countVotes(win(0, { deV: 'C', deH: 'D' }), { ...s, zone: 'C' }).met).toBe(true);
    expect(
      countVotes(win(0, { deV: 'D', deH: 'D' }), { ...s, voters: new Set(['DE-V', 'NDE-V']) }).met,
    ).toBe(false);
  });
});

describe('safe-stop advisory (fake GPIO lines, real state file)', () => {
  it('energises relay and lamp at start when all is well (fail-safe)', async () => {
    const { gpio, events } = await startAdvisory();
    expect(gpio.writes('advisory relay')).toEqual([true]);
    expect(gpio.writes('advisory lamp')).toEqual([true]);
    expect(events.map((e) => e.type)).toEqual(['advisory_started']);
    assertMatches('event-advisory.v1', { schema: 'turnwise.event.v1', ...events[0] });
  });

  it('raises after the hold time, latches, and clears only after acknowledgement', async () => {
    const { adv, gpio, events } = await startAdvisory();
    adv.update(win(0, { deV: 'D', deH: 'D' }));
    adv.update(win(2, { deV: 'D', deH: 'D' })); // held 2 s < 3 s
    await adv.settled();
    expect(adv.state).toBe('normal');
    adv.update(win(4, { deV: 'D', deH: 'D' })); // held 4 s >= 3 s
    await adv.settled();
    expect(adv.state).toBe('raised');
    expect(gpio.level('advisory relay')).toBe(false);
    expect(gpio.level('advisory lamp')).toBe(false);
    const raised = events.find((e) => e.type === 'advisory_raised')!;
    expect(raised).toMatchObject({
      severity: 'alarm',
      bearing: 'DE',
      channels: ['DE-V', 'DE-H'],
      outputs_energised: false,
    });
    expect(String(raised.message)).toMatch(/stop the fan safely/);

    // The vibration falls back: still latched, outputs stay dropped.
    for (const t of [6, 8, 10]) adv.update(win(t, {}));
    await adv.settled();
    expect(adv.state).toBe('latched');
    expect(gpio.level('advisory relay')).toBe(false);
    expect(events.filter((e) => e.type === 'advisory_cleared').map((e) => e.severity)).toEqual([
      'warning',
    ]);

    expect(adv.acknowledge('shift lead (test)')).toEqual({
      state: 'normal',
      outputs_energised: true,
      changed: true,
    });
    await adv.settled();
    expect(gpio.level('advisory relay')).toBe(true);
    expect(gpio.level('advisory lamp')).toBe(true);
    expect(adv.acknowledge('again')).toMatchObject({ changed: false });
    for (const e of events)
      assertMatches('event-advisory.v1', { schema: 'turnwise.event.v1', ...e });
  });

  it('acknowledged while the condition is still present: outputs stay dropped until it clears', async () => {
    const { adv, gpio, events } = await startAdvisory({ holdMs: 0 });
    adv.update(win(0, { deV: 'D', deH: 'D' }));
    gpio.press('advisory acknowledge button'); // local push-button
    gpio.release('advisory acknowledge button');
    await adv.settled();
    expect(adv.state).toBe('acknowledged');
    expect(gpio.level('advisory relay')).toBe(false);
    expect(events.find((e) => e.type === 'advisory_acknowledged')).toMatchObject({
      acknowledged_by: 'local button',
      state: 'acknowledged',
    });
    adv.update(win(1, { deV: 'D', deH: 'D' }));
    adv.update(win(2, {}));
    await adv.settled();
    expect(adv.state).toBe('normal');
    expect(gpio.level('advisory relay')).toBe(true);
  });

  it('is never raised by channels that are not OK, and reports lost voting coverage', async () => {
    const { adv, gpio, events } = await startAdvisory({ holdMs: 0 });
    // DE-H reads zone D but its sensor is judged faulty (e.g. cable off): only one OK vote at DE.
    for (let t = 0; t < 10; t++) adv.update(win(t, { deV: 'D', deH: 'D', deHok: false }));
    await adv.settled();
    expect(adv.state).toBe('normal');
    expect(gpio.level('advisory relay')).toBe(true);
    const cov = events.filter((e) => e.type === 'advisory_coverage');
    expect(cov).toHaveLength(1); // said once, not every window
    expect(cov[0]).toMatchObject({ severity: 'warning', bearings_without_vote: ['DE'] });
    adv.update(win(11, {}));
    expect(events.filter((e) => e.type === 'advisory_coverage').at(-1)).toMatchObject({
      severity: 'info',
      bearings_without_vote: [],
    });
  });

  it('resets the hold when the vote drops out, so a short excursion raises nothing', async () => {
    const { adv } = await startAdvisory();
    adv.update(win(0, { deV: 'D', deH: 'D' }));
    adv.update(win(2, { deV: 'D', deH: 'C' }));
    adv.update(win(4, { deV: 'D', deH: 'D' }));
    adv.update(win(6, { deV: 'D', deH: 'D' }));
    expect(adv.state).toBe('normal'); // held only 2 s since 4 s
    adv.update(win(7, { deV: 'D', deH: 'D' }));
    expect(adv.state).toBe('raised');
  });

  it('keeps a raised advisory latched across a restart of the agent', async () => {
    const store = latchFile();
    const first = await startAdvisory({ holdMs: 0 }, store);
    first.adv.update(win(0, { deV: 'D', deH: 'D' }));
    await first.adv.close();
    // stopping drops the outputs, like a dead agent
    expect(first.gpio.level('advisory relay')).toBe(false);

    const second = await startAdvisory({ holdMs: 0 }, store);
    expect(second.adv.state).toBe('latched');
    expect(second.gpio.writes('advisory relay')).toEqual([false]);
    expect(second.events[0]).toMatchObject({
      type: 'advisory_started',
      severity: 'alarm',
      outputs_energised: false,
    });
    expect(String(second.events[0]!.message)).toMatch(/stays latched until acknowledged/);
    second.adv.acknowledge('mqtt: control room (test)');
    await second.adv.settled();
    expect(second.gpio.level('advisory relay')).toBe(true);
  });

  it('starts as normal with a warning when the saved state is unreadable', async () => {
    const store = latchFile();
    writeFileSync(store.file, '{ torn');
    const { adv, events, gpio } = await startAdvisory({}, store);
    expect(adv.state).toBe('normal');
    expect(gpio.level('advisory relay')).toBe(true);
    expect(events[0]).toMatchObject({
      severity: 'warning',
      message: expect.stringMatching(/could not be read .*not valid JSON/),
    });
  });

  it('drops the outputs when measurements stop arriving, and restores them when they resume', async () => {
    let now = 1_000_000;
    const gpio = new FakeGpioLines({ nowMs: () => now });
    const events: AgentEvent[] = [];
    const adv = await SafeStopAdvisory.start({
      settings: settings({ stallMs: 30_000 }),
      gpio,
      asset: 'kessrow-id3a',
      emit: (e) => events.push(e),
      store: latchFile(),
      log: new CaptureLog(),
      now: () => now,
      tickMs: 0,
    });
    now += 29_000;
    adv.tick();
    expect(adv.energised()).toBe(true);
    now += 2_000;
    adv.tick();
    adv.tick();
    await adv.settled();
    expect(gpio.level('advisory relay')).toBe(false);
    expect(events.filter((e) => e.type === 'advisory_stalled')).toHaveLength(1);
    adv.update(win(0, {}));
    await adv.settled();
    expect(gpio.level('advisory relay')).toBe(true);
    expect(events.at(-1)).toMatchObject({ type: 'advisory_resumed' });
    expect(adv.state).toBe('normal'); // a stall never latches
  });

  it('reports a failed output write once as an alarm event and retries until the line responds', async () => {
    const { adv, gpio, events, log } = await startAdvisory({ holdMs: 0 });
    gpio.breakLine(
      'advisory relay',
      Object.assign(new Error('EIO writing the relay line'), { code: 'EIO' }),
    );
    adv.update(win(0, { deV: 'D', deH: 'D' }));
    await adv.settled();
    adv.tick();
    adv.tick();
    await adv.settled();
    expect(events.filter((e) => e.type === 'advisory_output_fault')).toHaveLength(1);
    expect(adv.health()).toMatchObject({ advisory_output_fault: true });
    gpio.breakLine('advisory relay', null);
    adv.tick();
    await adv.settled();
    expect(gpio.level('advisory relay')).toBe(false);
    expect(adv.health()).toMatchObject({ advisory_output_fault: false });
    expect(log.matching(/respond again/)).toHaveLength(1);
  });

  it('checks advisory.sensors against the configured sensors', () => {
    const cfg = advisorySchema.parse({ relay: { line: 5 }, sensors: ['DE-V', 'DE-X'] });
    expect(() => advisorySettings(cfg, loadConfig('config/example.yaml').sensors)).toThrow(
      UserError,
    );
    expect(() => advisorySettings(cfg, loadConfig('config/example.yaml').sensors)).toThrow(
      /advisory\.sensors\[1\]: no sensor has id "DE-X"/,
    );
    expect(advisorySchema.safeParse({ zone: 'D' }).success).toBe(false); // neither relay nor lamp
  });
});

/**
 * sysfs GPIO as the next process sees it: pin levels outlive the process that set them. A stand-in
 * for onoff's Gpio class over one shared table of pins, so "the agent died" and "systemd ran
 * outputs-off afterwards" can be played in one test.
 */
function sysfsPins() {
  const pins = new Map<number, 0 | 1>();
  const Gpio = class {
    constructor(
      private readonly n: number,
      direction: string,
    ) {
      if (direction === 'high') pins.set(n, 1);
      else if (direction === 'low') pins.set(n, 0);
    }
    read(): Promise<0 | 1> {
      return Promise.resolve(pins.get(this.n) ?? 0);
    }
    write(v: 0 | 1): Promise<void> {
      pins.set(this.n, v);
      return Promise.resolve();
    }
    watch(): void {}
    unwatch(): void {}
    unexport(): void {
      pins.delete(this.n); // handed back to the kernel: the level is no longer defined
    }
  };
  return { pins, Gpio: Gpio as unknown as GpioClass };
}

describe('outputs dropped after the agent died (systemd ExecStopPost: turnwise outputs-off)', () => {
  const PI4: GpioChip = { name: 'gpiochip512', base: 512, label: 'pinctrl-bcm2711', ngpio: 58 };
  const s = settings({ lamp: { line: LAMP, activeLow: true } });

  it('a killed agent leaves the relay energised; outputs-off drops relay and lamp, honouring active-low', async () => {
    const { pins, Gpio } = sysfsPins();
    const adv = await SafeStopAdvisory.start({
      settings: s,
      gpio: new OnoffLines(Gpio, PI4, new CaptureLog()),
      asset: 'kessrow-id3a',
      emit: () => {},
      store: latchFile(),
      log: new CaptureLog(),
      tickMs: 0,
    });
    await adv.settled();
    expect(adv.energised()).toBe(true);
    expect(pins.get(512 + RELAY)).toBe(1); // all well: relay energised (fail-safe)
    expect(pins.get(512 + LAMP)).toBe(0); // active-low lamp lit: pin low
    // kill -9: no close(), the pins keep their levels
    const dropped = await releaseAdvisoryOutputs(new OnoffLines(Gpio, PI4, new CaptureLog()), s);
    expect(dropped).toEqual(['advisory relay', 'advisory lamp']);
    expect(pins.get(512 + RELAY)).toBe(0);
    expect(pins.get(512 + LAMP)).toBe(1); // active-low off: pin high
  });

  it('an orderly stop drops the outputs itself and leaves them driven, not floating', async () => {
    const { pins, Gpio } = sysfsPins();
    const adv = await SafeStopAdvisory.start({
      settings: s,
      gpio: new OnoffLines(Gpio, PI4, new CaptureLog()),
      asset: 'kessrow-id3a',
      emit: () => {},
      store: latchFile(),
      log: new CaptureLog(),
      tickMs: 0,
    });
    await adv.settled();
    await adv.close();
    expect(pins.get(512 + RELAY)).toBe(0);
    expect(pins.get(512 + LAMP)).toBe(1);
  });
});

describe('turnwise outputs-off (the command systemd runs after the agent stopped)', () => {
  it('says there is nothing to drop when the config has no advisory', () => {
    const r = runCli([
      'outputs-off',
      '--config',
      'config/example.yaml',
      '--last-good',
      join(mkdtempSync(join(tmpdir(), 'tw-off-')), 'none.yaml'),
    ]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/no advisory outputs in config\/example\.yaml: nothing to drop/);
  });

  it.skipIf(existsSync('/sys/class/gpio'))(
    'on a machine without sysfs GPIO: exit 2 and what to check, no stack trace',
    () => {
      const d = mkdtempSync(join(tmpdir(), 'tw-off-'));
      dirs.push(d);
      const cfg = join(d, 'fan.yaml');
      writeFileSync(
        cfg,
        `${readFileSync('config/example.yaml', 'utf8')}\n` +
          `advisory: {relay: {line: ${RELAY}}, lamp: {line: ${LAMP}}}\n`,
      );
      const r = runCli(['outputs-off', '--config', cfg, '--last-good', join(d, 'none.yaml')]);
      expectNoStack(r.stderr);
      expect(r.code).toBe(2);
      expect(r.stderr).toMatch(/\/sys\/class\/gpio: no GPIO chips found/);
      expect(r.stderr).toMatch(/CONFIG_GPIO_SYSFS/);
    },
  );
});
