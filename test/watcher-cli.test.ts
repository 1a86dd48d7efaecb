import { existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { makeConditionCommand } from '../agent/cli/commands/condition.js';
import { UserError } from '../agent/errors.js';
import { FakeClock } from './support/fake-clock.js';
import { fanCase, synthWindow } from './support/fan-windows.js';

function setup(): { dir: string; cfgFile: string } {
  const dir = mkdtempSync(join(tmpdir(), 'tw-cli-'));
  const example = readFileSync('config/example.yaml', 'utf8').replace(
    'state_dir: ./state',
    `state_dir: ${join(dir, 'state')}`,
  );
  const cfgFile = join(dir, 'fan.yaml');
  writeFileSync(cfgFile, example);
  return { dir, cfgFile };
}

async function run(argv: string[]): Promise<{ code: number; out: string }> {
  let out = '';
  const spy = vi.spyOn(process.stdout, 'write').mockImplementation((chunk: string | Uint8Array) => {
    out += String(chunk);
    return true;
  });
  try {
    const code = await makeConditionCommand(new FakeClock(Date.parse('2031-03-02T08:00:00Z'))).run(
      argv,
    );
    return { code, out };
  } finally {
    spy.mockRestore();
  }
}

afterEach(() => vi.restoreAllMocks());

describe('turnwise condition', () => {
  it('learns a baseline from saved DSP windows, shows it, and clears it', async () => {
    const { dir, cfgFile } = setup();
    const windows = [0, 1, 2, 3].map((i) =>
      synthWindow({ ...fanCase('static', { amp: 2.5, phase: 40 }), start_index: i * 51200 }),
    );
    const wfile = join(dir, 'windows.json');
    writeFileSync(wfile, JSON.stringify({ windows }));

    const learned = await run(['learn-baseline', '--config', cfgFile, wfile]);
    expect(learned.code).toBe(0);
    expect(learned.out).toMatch(/baseline learned from 4 window\(s\)/);
    // 1x 2.5 mm/s r.m.s.; overall 2.5 x sqrt(1 + 0.1^2 + 0.05^2 + 0.3^2) = 2.63
    expect(learned.out).toMatch(/DE-V\s+2\.50\s+40\s+2\.63/);
    const file = join(dir, 'state', 'watcher', 'baseline.json');
    expect(JSON.parse(readFileSync(file, 'utf8')).learned_at).toBe('2031-03-02T08:00:00.000Z');

    const shown = await run(['show', '--config', cfgFile, '--json']);
    const j = JSON.parse(shown.out);
    expect(j.baseline.channels['NDE-V'].one_x_phase_deg).toBeCloseTo(52, 9);
    expect(j.limits.bc_mm_s).toBe(2.8);
    expect(j.confirmed).toBeNull();

    const human = await run(['show', '--config', cfgFile]);
    expect(human.out).toMatch(
      /limits: ISO 20816-3 group 2, rigid support: A\/B 1\.40, B\/C 2\.80, C\/D 4\.50 mm\/s/,
    );
    expect(human.out).toMatch(/history: 0 point\(s\)/);

    expect((await run(['clear-baseline', '--config', cfgFile])).out).toMatch(
      /learned baseline removed/,
    );
    expect(existsSync(file)).toBe(false);
  });

  it('names the file and the problem for bad input', async () => {
    const { dir, cfgFile } = setup();
    await expect(
      run(['learn-baseline', '--config', cfgFile, join(dir, 'nope.json')]),
    ).rejects.toThrow(/nope\.json: file not found/);
    const bad = join(dir, 'bad.json');
    writeFileSync(bad, JSON.stringify([{ start_index: 0 }]));
    await expect(run(['learn-baseline', '--config', cfgFile, bad])).rejects.toThrow(
      /bad\.json: not DSP windows:\n.*\[0\]\.end_index/,
    );
    const few = join(dir, 'few.json');
    writeFileSync(few, JSON.stringify([synthWindow(fanCase('static'))]));
    await expect(run(['learn-baseline', '--config', cfgFile, few])).rejects.toThrow(
      /only 1 window\(s\) with a healthy 1x vector/,
    );
    await expect(run(['show'])).rejects.toThrow(UserError);
    await expect(run(['frobnicate', '--config', cfgFile])).rejects.toThrow(
      /unknown action or wrong arguments: "frobnicate"/,
    );
  });
});
