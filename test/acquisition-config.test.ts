import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { validateConfig } from '../agent/config/load.js';
import { silentLogger } from '../agent/log.js';
import { serialOptionsFromConfig } from '../drivers/serial/serial-source.js';
import { expectNoStack, runCli } from './support/cli.js';

const base = {
  machine: { id: 'kessrow-id3a', group: 2, support: 'rigid' },
  tach: { channel: 6, trigger_v: 2.5 },
  sensors: [
    { id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 },
  ],
};
const serial = {
  driver: 'serial',
  device: '/dev/serial/by-id/usb-Kessrow_DAQ_0001-if00',
  sample_rate_hz: 25600,
  channels: 8,
};

describe('acquisition config section', () => {
  it('stays optional: configs without it are still valid', () => {
    expect(validateConfig(base).acquisition).toBeUndefined();
  });

  it('fills the serial defaults and maps them to the driver options', () => {
    const cfg = validateConfig({ ...base, acquisition: serial });
    expect(cfg.acquisition).toEqual({
      ...serial,
      baud: 921600,
      board_tach_edges: false,
      reconnect_min_ms: 500,
      reconnect_max_ms: 10000,
      stall_timeout_ms: 5000,
      queue_frames: 256,
      max_frame_bytes: 262144,
      sample_rate_tolerance_ppm: 100,
      max_samples_per_channel: 8192,
      clock_step_tolerance_ms: 1000,
    });
    if (cfg.acquisition?.driver !== 'serial') throw new Error('expected the serial driver');
    const o = serialOptionsFromConfig(cfg.acquisition, silentLogger);
    expect(o).toMatchObject({
      device: '/dev/serial/by-id/usb-Kessrow_DAQ_0001-if00',
      sampleRateHz: 25600,
      channels: 8,
      reconnectMinMs: 500,
      maxFrameBytes: 262144,
      sampleRateTolerancePpm: 100,
      maxSamplesPerChannel: 8192,
      boardTachEdges: false,
    });
  });

  it('names each key the serial driver is missing', () => {
    const run = () => validateConfig({ ...base, acquisition: { driver: 'serial' } }, 'f.yaml');
    expect(run).toThrow(/f\.yaml: acquisition\.device: driver "serial" needs device/);
    expect(run).toThrow(/acquisition\.sample_rate_hz: driver "serial" needs sample_rate_hz/);
    expect(run).toThrow(/acquisition\.channels: driver "serial" needs channels/);
  });

  it('keeps driver, file and realtime with their meanings for recordings', () => {
    const cfg = validateConfig({
      ...base,
      acquisition: { driver: 'wav', file: 'rec.wav', realtime: true },
    });
    expect(cfg.acquisition).toEqual({
      driver: 'wav',
      file: 'rec.wav',
      realtime: true,
      pcm_full_scale_v: 10,
    });
    expect(() => validateConfig({ ...base, acquisition: { driver: 'wav' } })).toThrow(
      /acquisition\.file: driver "wav" needs file/,
    );
  });

  it("accepts driver: sim with the simulator's keys and their defaults, and names a missing scenario", () => {
    const cfg = validateConfig({
      ...base,
      acquisition: { driver: 'sim', scenario: 'example-scenario.yaml', time_scale: 3600 },
    });
    expect(cfg.acquisition).toEqual({
      driver: 'sim',
      scenario: 'example-scenario.yaml',
      pace: 'realtime',
      time_scale: 3600,
      from_day: 0,
      block_ms: 100,
      board_tach_edges: false,
    });
    expect(() => validateConfig({ ...base, acquisition: { driver: 'sim' } }, 'f.yaml')).toThrow(
      /f\.yaml: acquisition\.scenario: driver "sim" needs scenario/,
    );
    expect(() =>
      validateConfig(
        { ...base, acquisition: { driver: 'sim', scenario: 's.yaml', time_scale: 0 } },
        'f.yaml',
      ),
    ).toThrow(/acquisition\.time_scale: .*(found 0)/);
  });

  it('rejects unknown drivers, keys of another driver and an inverted backoff, naming the path', () => {
    expect(() => validateConfig({ ...base, acquisition: { driver: 'usb' } }, 'f.yaml')).toThrow(
      /f\.yaml: acquisition\.driver: driver must be one of wav, serial, sim .*\(found "usb"\)/,
    );
    expect(() => validateConfig({ ...base, acquisition: { file: 'rec.wav' } }, 'f.yaml')).toThrow(
      /acquisition\.driver: driver must be one of wav, serial, sim .*\(found nothing\)/,
    );
    expect(() =>
      validateConfig({
        ...base,
        acquisition: { driver: 'sim', scenario: 's.yaml', baudrate: 9600 },
      }),
    ).toThrow(/acquisition: unknown key\(s\) "baudrate"/);
    // a serial key under the wav driver is reported as unknown, not silently ignored
    expect(() =>
      validateConfig({
        ...base,
        acquisition: { driver: 'wav', file: 'rec.wav', device: '/dev/ttyACM0' },
      }),
    ).toThrow(/acquisition: unknown key\(s\) "device"/);
    expect(() =>
      validateConfig({
        ...base,
        acquisition: { driver: 'sim', scenario: 's.yaml', realtime: true },
      }),
    ).toThrow(/acquisition: unknown key\(s\) "realtime"/);
    expect(() =>
      validateConfig({
        ...base,
        acquisition: { ...serial, reconnect_min_ms: 5000, reconnect_max_ms: 1000 },
      }),
    ).toThrow(/acquisition\.reconnect_min_ms: reconnect_min_ms must not exceed reconnect_max_ms/);
  });

  it("checks the sensor and tach channels against the serial board's channel count", () => {
    const six = { ...serial, channels: 6 };
    const tachOut = () => validateConfig({ ...base, acquisition: six }, 'f.yaml');
    expect(tachOut).toThrow(
      /f\.yaml: tach\.channel: the tach is on channel 6 but acquisition\.channels is 6 \(the board sends channels 0-5\); .*acquisition\.board_tach_edges: true/,
    );
    // a board that times the tach itself need not digitise it
    expect(
      validateConfig({ ...base, acquisition: { ...six, board_tach_edges: true } }).acquisition,
    ).toMatchObject({ board_tach_edges: true });
    const sensorOut = {
      ...base,
      sensors: [
        ...base.sensors,
        {
          id: 'NDE-V',
          channel: 8,
          bearing: 'NDE',
          direction: 'vertical',
          sensitivity_mv_per_g: 100,
        },
      ],
    };
    expect(() => validateConfig({ ...sensorOut, acquisition: serial }, 'f.yaml')).toThrow(
      /f\.yaml: sensors\[1\]\.channel: sensor NDE-V is on channel 8 but acquisition\.channels is 8 \(the board sends channels 0-7\)/,
    );
    // the simulator makes the channels the config names; a recording's count is checked when it is
    // opened
    expect(
      validateConfig({ ...sensorOut, acquisition: { driver: 'sim', scenario: 's.yaml' } }).sensors,
    ).toHaveLength(2);
  });

  it('probe-serial refuses a config whose acquisition is not the serial board, saying what to give instead', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-acq-'));
    try {
      const file = join(dir, 'agent.yaml');
      writeFileSync(
        file,
        JSON.stringify({ ...base, acquisition: { driver: 'sim', scenario: 'fan.yaml' } }),
      );
      const r = runCli(['probe-serial', '--config', file]);
      expect(r.code).toBe(2);
      expect(r.stderr).toContain(
        `${file}: acquisition.driver: is "sim", not "serial": there is no ` +
          `board device in this config\n  -> give the board with --device ` +
          `PATH, or use a config with acquisition.driver: serial`,
      );
      expectNoStack(r.stderr);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
