/**
 * createSource: the config's acquisition section turned into a sample source, for each driver, with
 * real files (a WAV recording, the scenario file) in a folder of their own next to the config.
 */
import { copyFileSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { loadConfig, readYamlFile } from '../agent/config/load.js';
import { isUserError } from '../agent/errors.js';
import { MemoryLogger } from '../agent/log.js';
import { createSource } from '../drivers/create-source.js';
import type { Pacer } from '../drivers/pacer.js';
import { PacedSource } from '../drivers/paced-source.js';
import { SerialSource } from '../drivers/serial/serial-source.js';
import { SimSource } from '../drivers/sim/source.js';
import type { SampleBlock } from '../drivers/source.js';
import { WavSource } from '../drivers/wav/reader.js';
import { writeFloatWav } from './support/wav.js';

const log = new MemoryLogger();
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

/**
 * Writes the invented demo config with this acquisition section into a fresh folder; returns its
 * path.
 */
function configWith(acquisition: Record<string, unknown> | undefined): {
  dir: string;
  file: string;
} {
  const dir = mkdtempSync(join(tmpdir(), 'tw-source-'));
  dirs.push(dir);
  const raw = readYamlFile('config/example.yaml', 'config', 'config/example.yaml') as Record<
    string,
    unknown
  >;
  const file = join(dir, 'agent.yaml');
  writeFileSync(file, JSON.stringify(acquisition ? { ...raw, acquisition } : raw));
  return { dir, file };
}

/** The UserError a call throws, formatted as the CLI prints it. */
function userError(fn: () => unknown): string {
  try {
    fn();
  } catch (e) {
    if (isUserError(e)) return e.format();
    throw e;
  }
  throw new Error('expected a UserError');
}

/** A clock that advances only when slept on, recording each sleep. */
function fakePacer(): Pacer & { sleeps: number[] } {
  let now = 0;
  const sleeps: number[] = [];
  return {
    sleeps,
    now: () => now,
    sleep: async (ms) => {
      sleeps.push(ms);
      now += ms;
    },
  };
}

describe('createSource (acquisition.driver)', () => {
  it("wav: reads the recording named relative to the config file's folder, as fast as it can", async () => {
    const { dir, file } = configWith({ driver: 'wav', file: 'rec.wav' });
    const ch = Array.from({ length: 7 }, (_, c) =>
      Float32Array.from({ length: 10_000 }, (_, i) => c + i / 10_000),
    );
    writeFloatWav(join(dir, 'rec.wav'), 25_600, ch);
    const { source, boardTimesTach } = createSource(loadConfig(file), file, { log });
    expect(source).toBeInstanceOf(WavSource);
    expect(boardTimesTach).toBe(false);
    expect(await source.open()).toMatchObject({
      sampleRate: 25_600,
      channelCount: 7,
      totalSamples: 10_000,
      description: join(dir, 'rec.wav'),
    });
    let n = 0;
    for await (const item of source.items()) {
      const b = item as SampleBlock;
      expect(b.channels[3]![0]).toBeCloseTo(3 + b.startIndex / 10_000, 5);
      n += b.channels[0]!.length;
    }
    expect(n).toBe(10_000);
    await source.close();
  });

  it('wav with realtime: true hands out blocks no faster than the sample rate', async () => {
    const { dir, file } = configWith({ driver: 'wav', file: 'rec.wav', realtime: true });
    writeFloatWav(
      join(dir, 'rec.wav'),
      25_600,
      Array.from({ length: 7 }, () => new Float32Array(25_600)),
    );
    const pacer = fakePacer();
    const { source } = createSource(loadConfig(file), file, { log, pacer });
    expect(source).toBeInstanceOf(PacedSource);
    await source.open();
    const due: number[] = [];
    for await (const item of source.items())
      due.push(
        pacer.now() -
          ((item as SampleBlock).startIndex + (item as SampleBlock).channels[0]!.length) / 25.6,
      );
    // each block is handed out exactly when its last sample is due: 1 s of samples takes 1000 ms
    expect(due.every((d) => Math.abs(d) < 1e-9)).toBe(true);
    expect(pacer.sleeps.reduce((a, b) => a + b, 0)).toBeCloseTo(1000, 6);
    await source.close();
  });

  it('serial: the board on the configured device, with tach edges from the board when the config says so', async () => {
    const device = '/dev/serial/by-id/usb-Kessrow_Vib-DAQ_8ch_0001-if00';
    const { file } = configWith({
      driver: 'serial',
      device,
      sample_rate_hz: 25_600,
      channels: 8,
      board_tach_edges: true,
    });
    const { source, boardTimesTach } = createSource(loadConfig(file), file, { log });
    expect(source).toBeInstanceOf(SerialSource);
    expect(boardTimesTach).toBe(true);
    // nothing is opened yet: the health report names the device and says it is not connected
    expect(source.health!()).toMatchObject({ device, connected: false, frames_ok: 0 });
  });

  it("sim: the simulated fan from the scenario named relative to the config, with the config's channel map", async () => {
    const { dir, file } = configWith({
      driver: 'sim',
      scenario: 'fan.yaml',
      pace: 'fast',
      from_day: 5.625,
      block_ms: 50,
      board_tach_edges: true,
    });
    copyFileSync('config/example-scenario.yaml', join(dir, 'fan.yaml'));
    const { source, boardTimesTach } = createSource(loadConfig(file), file, { log });
    expect(source).toBeInstanceOf(SimSource);
    expect(boardTimesTach).toBe(true);
    const info = await source.open();
    expect(info).toMatchObject({ sampleRate: 25_600, channelCount: 7 });
    expect(info.description).toContain(join(dir, 'fan.yaml'));
    const first = (await source.items()[Symbol.asyncIterator]().next()).value as SampleBlock;
    expect(first.channels[0]).toHaveLength(1280);
    expect(first.tachEdges).toBeDefined();
    expect((source as SimSource).speedRpm).toBeCloseTo(1485, -1);
    await source.close();
  });

  it('names the key, the file it looked for and what to do when a file is missing or the section is absent', () => {
    const wav = configWith({ driver: 'wav', file: 'recordings/day5.wav' });
    expect(userError(() => createSource(loadConfig(wav.file), wav.file, { log }))).toBe(
      `${wav.file}: acquisition.file: recording ${join(wav.dir, 'recordings/day5.wav')} not ` +
        `found (a relative path is taken from the config file's folder, ${wav.dir})\n` +
        `  -> fix acquisition.file, or put the recording there`,
    );
    const sim = configWith({ driver: 'sim', scenario: 'fan.yaml' });
    expect(userError(() => createSource(loadConfig(sim.file), sim.file, { log }))).toMatch(
      /agent\.yaml: acquisition\.scenario: scenario file .*fan\.yaml not found .*\n  -> fix acquisition\.scenario, or put the scenario file there/,
    );
    const none = configWith(undefined);
    expect(userError(() => createSource(loadConfig(none.file), none.file, { log }))).toMatch(
      /agent\.yaml: acquisition: the config says nowhere where the samples come from\n  -> add an acquisition section: driver wav \(a recording\), serial \(the board\) or sim \(the simulated fan\)/,
    );
  });

  it("passes on a scenario that does not fit the config with the scenario's own path-naming message", () => {
    const { dir, file } = configWith({ driver: 'sim', scenario: 'fan.yaml' });
    const scenario = readYamlFile('config/example-scenario.yaml', 'scenario', '') as {
      rotor: { bearings: { name: string }[] };
    };
    scenario.rotor.bearings[1]!.name = 'OB';
    writeFileSync(join(dir, 'fan.yaml'), JSON.stringify(scenario));
    expect(userError(() => createSource(loadConfig(file), file, { log }))).toMatch(
      /fan\.yaml: .*problem\(s\) between the scenario and the config:[\s\S]*"NDE"[\s\S]*-> make the scenario and the config describe the same fan and channels/,
    );
  });

  it('refuses bad sections at load with the path and what is expected, for each driver', () => {
    const cases: [Record<string, unknown>, RegExp][] = [
      [
        { driver: 'wav', file: 'rec.wav', pcm_full_scale_v: -1 },
        /acquisition\.pcm_full_scale_v: .*(found -1)/,
      ],
      [
        { driver: 'serial', device: '/dev/ttyACM0', sample_rate_hz: 25_600, channels: 4 },
        /sensors\[4\]\.channel: sensor NDE-H is on channel 4 but acquisition\.channels is 4/,
      ],
      [
        { driver: 'sim', scenario: 'fan.yaml', pace: 'slow' },
        /acquisition\.pace: .*(found "slow")/,
      ],
    ];
    for (const [acq, re] of cases) {
      const { file } = configWith(acq);
      expect(userError(() => loadConfig(file))).toMatch(re);
    }
  });
});
