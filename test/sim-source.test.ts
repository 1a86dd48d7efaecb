import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it, vi } from 'vitest';
import { simDriverSchema } from '../agent/config/sim.js';
import { loadConfig } from '../agent/config/load.js';
import { simulateCommand } from '../agent/cli/commands/simulate.js';
import { UserError } from '../agent/errors.js';
import { createSimSource, SimSource, type Pacer } from '../drivers/sim/source.js';
import type { SampleBlock, SourceItem } from '../drivers/source.js';
import { angleDiff, dft, plan, testScenario } from './sim-fixtures.js';

const REV = 1024; // samples per revolution at 1500 r/min, 25.6 kHz

async function take(src: SimSource, blocks: number): Promise<SampleBlock[]> {
  const out: SampleBlock[] = [];
  for await (const item of src.items()) {
    if (item.kind !== 'samples') throw new Error('unexpected gap');
    // the source reuses its arrays: keep copies
    out.push({
      ...item,
      channels: item.channels.map((c) => Float32Array.from(c)),
      ...(item.tachEdges ? { tachEdges: Float64Array.from(item.tachEdges) } : {}),
    });
    if (out.length === blocks) break;
  }
  return out;
}

/**
 * 1x of one channel over whole revolutions of consecutive blocks, as a complex amplitude (volts).
 */
function oneX(
  blocks: SampleBlock[],
  channel: number,
): { re: number; im: number; amp: number; lagDeg: number } {
  const n = blocks.reduce((s, b) => s + b.channels[0]!.length, 0);
  const x = new Float64Array(n);
  let o = 0;
  for (const b of blocks) {
    x.set(b.channels[channel]!, o);
    o += b.channels[0]!.length;
  }
  return dft(x, 0, n - (n % REV), 1 / REV, -blocks[0]!.startIndex);
}

describe('SimSource (driver: sim)', () => {
  it("yields blocks of the board's channel map with continuous sample indices, and the board tach edges when asked", async () => {
    const src = new SimSource(plan(), { blockSamples: 2560, pace: 'fast', boardTachEdges: true });
    const info = await src.open();
    expect(info).toMatchObject({ sampleRate: 25600, channelCount: 7 });
    const blocks = await take(src, 5);
    blocks.forEach((b, k) => {
      expect(b.startIndex).toBe(k * 2560);
      expect(b.channels).toHaveLength(7);
      expect(b.channels[0]).toHaveLength(2560);
      for (const t of b.tachEdges!) {
        expect(t).toBeGreaterThanOrEqual(b.startIndex - 1);
        expect(t).toBeLessThan(b.startIndex + 2560);
        expect(Math.abs(t / REV - Math.round(t / REV))).toBeLessThan(1e-6);
      }
    });
    expect(blocks.reduce((s, b) => s + b.tachEdges!.length, 0)).toBe(12);
    await src.close();
  });

  it('paces blocks as a board delivers them, against an injected clock', async () => {
    let now = 1000;
    const sleeps: number[] = [];
    const pacer: Pacer = {
      now: () => now,
      sleep: async (ms) => {
        sleeps.push(ms);
        now += ms;
      },
    };
    const src = new SimSource(plan(), { blockSamples: 2560, pace: 'realtime', pacer });
    await src.open();
    await take(src, 3);
    expect(sleeps.map((s) => Math.round(s * 1000) / 1000)).toEqual([100, 100, 100]);
    await src.close();
  });

  it('ends after totalSamples with a short last block, and stops when closed', async () => {
    const src = new SimSource(plan(), { blockSamples: 1000, pace: 'fast', totalSamples: 2500 });
    expect((await src.open()).totalSamples).toBe(2500);
    const lens: number[] = [];
    for await (const item of src.items()) lens.push((item as SampleBlock).channels[0]!.length);
    expect(lens).toEqual([1000, 1000, 500]);
    const live = new SimSource(plan(), { blockSamples: 1000, pace: 'fast' });
    await live.open();
    let n = 0;
    for await (const item of live.items()) {
      expect(item.kind).toBe('samples');
      if (++n === 2) await live.close();
    }
    expect(n).toBe(2);
  });

  it('moves the 1x when a weight is fitted as influence coefficients say, and a one-plane balancing job on it converges (influence-coefficient method, textbook)', async () => {
    // one plane, read at NDE-V: as found, trial run, correction W = -V0 / H, check run
    const src = new SimSource(plan(testScenario({ signal: { noise_rms_g: 0.003 } })), {
      blockSamples: 8 * REV,
      pace: 'fast',
    });
    await src.open();
    const it = src.items()[Symbol.asyncIterator]();
    const run = async () => {
      await it.next(); // settle one block after a change
      const blocks: SampleBlock[] = [];
      for (let i = 0; i < 4; i++) blocks.push((await it.next()).value as SourceItem & SampleBlock);
      return oneX(blocks, 3);
    };
    const v0 = await run();
    const model0 = src.modelOrder(1).find((m) => m.id === 'NDE-V')!;
    expect(Math.abs(angleDiff(v0.lagDeg, model0.phase_deg - 90))).toBeLessThan(0.5);
    src.addWeight({
      id: 'T',
      plane: 'P1',
      mass_g: 20,
      radius_mm: 760,
      angle_deg: 0,
      convention: 'against_rotation',
    });
    const v1 = await run();
    // H = (V1 - V0) / T, T = 20 g at 0 deg
    const h = { re: (v1.re - v0.re) / 20, im: (v1.im - v0.im) / 20 };
    // W = -V0 / H
    const d = h.re * h.re + h.im * h.im;
    const w = { re: -(v0.re * h.re + v0.im * h.im) / d, im: -(v0.im * h.re - v0.re * h.im) / d };
    const grams = Math.hypot(w.re, w.im);
    const angle = ((-Math.atan2(w.im, w.re) * 180) / Math.PI + 360) % 360; // lag = against rotation
    src.removeWeight('T');
    src.addWeight({
      id: 'C',
      plane: 'P1',
      mass_g: grams,
      radius_mm: 760,
      angle_deg: angle,
      convention: 'against_rotation',
    });
    const v2 = await run();
    // the unbalance was 40 g at 30 deg in P1: the correction is 40 g at 210 deg
    expect(grams).toBeCloseTo(40, 0);
    expect(Math.abs(angleDiff(angle, 210))).toBeLessThan(1);
    expect(v2.amp / v0.amp).toBeLessThan(0.03);
    expect(src.weights().map((x) => x.id)).toEqual(['C']);
    await src.close();
  });

  it('is built from the config section, with the scenario path relative to the config file', async () => {
    const section = simDriverSchema.parse({
      driver: 'sim',
      scenario: 'example-scenario.yaml',
      pace: 'fast',
      from_day: 5.9,
      block_ms: 50,
    });
    expect(section).toMatchObject({ time_scale: 1, board_tach_edges: false });
    const src = createSimSource(loadConfig('config/example.yaml'), section, 'config/example.yaml');
    const info = await src.open();
    expect(info.description).toContain('example-scenario.yaml');
    const [b] = await take(src, 1);
    expect(b!.channels[0]).toHaveLength(1280);
    expect(src.speedRpm).toBeGreaterThan(1470);
    expect(() =>
      simDriverSchema.parse({ driver: 'sim', scenario: 'x.yaml', time_scale: 0 }),
    ).toThrow();
  });
});

describe('turnwise simulate', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tw-simcli-'));

  async function runCli(args: string[]): Promise<{ code: number; out: string }> {
    let out = '';
    const spy = vi
      .spyOn(process.stdout, 'write')
      .mockImplementation((chunk: string | Uint8Array) => {
        out += String(chunk);
        return true;
      });
    try {
      const code = await simulateCommand.run(args);
      return { code, out };
    } finally {
      spy.mockRestore();
    }
  }

  it('records the demo scenario to a WAV file and prints a JSON summary with units in the names', async () => {
    const f = join(dir, 'rec.wav');
    const { code, out } = await runCli([
      '--scenario',
      'config/example-scenario.yaml',
      '--config',
      'config/example.yaml',
      '--out',
      f,
      '--seconds',
      '2',
      '--from-day',
      '5.5',
      '--json',
    ]);
    expect(code).toBe(0);
    const s = JSON.parse(out);
    expect(s).toMatchObject({
      file: f,
      sample_rate_hz: 25600,
      channels: 7,
      frames: 51200,
      duration_s: 2,
      start_at: 'day 5 12:00:00',
    });
    expect(s.model_1x_end).toHaveLength(6);
    expect(s.model_1x_end[0]).toHaveProperty('amp_pk_mm_s');
    expect(s.model_1x_end[0]).toHaveProperty('phase_deg');
    expect(s.speed_end_rpm).toBeGreaterThan(1480);
    const buf = readFileSync(f);
    expect(buf.length).toBe(s.bytes);
    // data chunk size just before the samples
    expect(buf.readUInt32LE(buf.length - 51200 * 28 - 4)).toBe(51200 * 28);
  });

  it('prints a readable table, and names wrong arguments', async () => {
    const { out } = await runCli([
      '--scenario',
      'config/example-scenario.yaml',
      '--config',
      'config/example.yaml',
      '--out',
      join(dir, 'h.wav'),
      '--seconds',
      '0.5',
    ]);
    expect(out).toMatch(/wrote .*h\.wav: 0\.5 s, 7 channels x 25600 Hz/);
    expect(out).toMatch(/0 +DE-V +DE vertical +\d+\.\d\d +\d+\n/);
    expect(out).toContain('1x mm/s rms');
    await expect(
      runCli(['--scenario', 'x.yaml', '--config', 'config/example.yaml', '--out', 'o.wav']),
    ).rejects.toThrow(/--seconds is required/);
    await expect(
      runCli([
        '--scenario',
        'x.yaml',
        '--config',
        'config/example.yaml',
        '--out',
        'o.wav',
        '--seconds',
        'ten',
      ]),
    ).rejects.toThrow(UserError);
    await expect(
      runCli([
        '--scenario',
        join(dir, 'missing.yaml'),
        '--config',
        'config/example.yaml',
        '--out',
        'o.wav',
        '--seconds',
        '1',
      ]),
    ).rejects.toThrow(/scenario file not found/);
    const huge = runCli([
      '--scenario',
      'config/example-scenario.yaml',
      '--config',
      'config/example.yaml',
      '--out',
      join(dir, 'x.wav'),
      '--seconds',
      '100000',
    ]);
    await expect(huge).rejects.toThrow(/4 GiB limit/);
    writeFileSync(join(dir, 'bad.yaml'), 'scenario: x\n');
    await expect(
      runCli([
        '--scenario',
        join(dir, 'bad.yaml'),
        '--config',
        'config/example.yaml',
        '--out',
        'o.wav',
        '--seconds',
        '1',
      ]),
    ).rejects.toThrow(/sample_rate_hz/);
  });
});
