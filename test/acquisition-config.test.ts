import { describe, expect, it } from 'vitest';
import { validateConfig } from '../agent/config/load.js';
import { silentLogger } from '../agent/log.js';
import { serialOptionsFromConfig } from '../drivers/serial/serial-source.js';

const base = {
  machine: { id: 'kessrow-id3a', group: 2, support: 'rigid' },
  tach: { channel: 6, trigger_v: 2.5 },
  sensors: [{ id: 'DE-V', channel: 0, bearing: 'DE', direction: 'vertical', sensitivity_mv_per_g: 100 }],
};

describe('acquisition config section', () => {
  it('stays optional: configs without it are still valid', () => {
    expect(validateConfig(base).acquisition).toBeUndefined();
  });

  it('fills the serial defaults and maps them to the driver options', () => {
    const cfg = validateConfig({ ...base, acquisition: { driver: 'serial', device: '/dev/serial/by-id/usb-Kessrow_DAQ_0001-if00', sample_rate_hz: 25600, channels: 8 } });
    expect(cfg.acquisition).toMatchObject({ driver: 'serial', baud: 921600, realtime: false, reconnect_min_ms: 500, reconnect_max_ms: 10000, stall_timeout_ms: 5000, queue_frames: 256 });
    const o = serialOptionsFromConfig(cfg.acquisition!, silentLogger);
    expect(o).toMatchObject({ device: '/dev/serial/by-id/usb-Kessrow_DAQ_0001-if00', sampleRateHz: 25600, channels: 8, reconnectMinMs: 500, maxFrameBytes: 262144 });
  });

  it('names each key the serial driver is missing', () => {
    expect(() => validateConfig({ ...base, acquisition: { driver: 'serial' } }, 'f.yaml')).toThrow(/acquisition\.device: driver "serial" needs device/);
    expect(() => validateConfig({ ...base, acquisition: { driver: 'serial' } }, 'f.yaml')).toThrow(/acquisition\.sample_rate_hz: driver "serial" needs sample_rate_hz/);
    expect(() => validateConfig({ ...base, acquisition: { driver: 'serial' } }, 'f.yaml')).toThrow(/acquisition\.channels: driver "serial" needs channels/);
  });

  it('keeps driver, file and realtime with their meanings for recordings', () => {
    const cfg = validateConfig({ ...base, acquisition: { driver: 'wav', file: 'rec.wav', realtime: false } });
    expect(cfg.acquisition).toMatchObject({ driver: 'wav', file: 'rec.wav', realtime: false });
    expect(() => validateConfig({ ...base, acquisition: { driver: 'wav' } })).toThrow(/acquisition\.file: driver "wav" needs file/);
  });

  it('rejects unknown drivers, unknown keys and an inverted backoff', () => {
    expect(() => validateConfig({ ...base, acquisition: { driver: 'usb' } })).toThrow(/acquisition\.driver/);
    expect(() => validateConfig({ ...base, acquisition: { driver: 'sim', baudrate: 9600 } })).toThrow(/acquisition: unknown key\(s\) "baudrate"/);
    expect(() => validateConfig({ ...base, acquisition: { driver: 'sim', reconnect_min_ms: 5000, reconnect_max_ms: 1000 } })).toThrow(/reconnect_min_ms must not exceed reconnect_max_ms/);
  });
});
