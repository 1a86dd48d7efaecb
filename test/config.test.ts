import { describe, expect, it } from 'vitest';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { loadConfig } from '../agent/config/load.js';
import { UserError } from '../agent/errors.js';

function writeTmp(name: string, text: string): string {
  const dir = mkdtempSync(join(tmpdir(), 'tw-cfg-'));
  const f = join(dir, name);
  writeFileSync(f, text);
  return f;
}

describe('config loading', () => {
  it('loads the example config with defaults filled in', () => {
    const cfg = loadConfig('config/example.yaml');
    expect(cfg.machine.id).toBe('kessrow-id3a');
    expect(cfg.sensors).toHaveLength(6);
    expect(cfg.tach.pulses_per_rev).toBe(1);
    expect(cfg.dsp.resample_points).toBe(256);
    expect(cfg.sensors[0]!.mounting_angle_deg).toBe(0);
  });

  it('names the path, the expectation and what was found', () => {
    const f = writeTmp(
      'bad.yaml',
      'machine: {id: f1, group: 3, support: rigid}\ntach: {channel: 6, trigger_v: 2.5}\n' +
        'sensors:\n  - {id: A, channel: 6, bearing: DE, direction: sideways, ' +
        'sensitivity_mv_per_g: 100}\n',
    );
    let err: unknown;
    try {
      loadConfig(f);
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(UserError);
    const msg = (err as UserError).message;
    expect(msg).toContain('machine.group');
    expect(msg).toContain('found 3');
    expect(msg).toMatch(/machine\.group: .*expected one of 1\|2/);
    expect(msg).toContain('sensors[0].direction');
    expect(msg).toContain('found "sideways"');
  });

  it('checks rules across keys once each key is valid', () => {
    const f = writeTmp(
      'cross.yaml',
      'machine: {id: f1, group: 2, support: rigid}\ntach: {channel: 6, trigger_v: 2.5}\n' +
        'sensors:\n  - {id: A, channel: 6, bearing: DE, direction: vertical, ' +
        'sensitivity_mv_per_g: 100}\n  - {id: A, channel: 1, bearing: DE, direction: ' +
        'horizontal, sensitivity_mv_per_g: 100}\n',
    );
    expect(() => loadConfig(f)).toThrow(/sensors\[0\]\.channel: channel 6 is the tach channel/);
    expect(() => loadConfig(f)).toThrow(
      /sensors\[1\]\.id: sensor id "A" is already used by sensors\[0\]/,
    );
  });

  it('reads the gpio section with its defaults and checks its lines and speeds against the rest', () => {
    const head =
      'machine: {id: f1, group: 2, support: rigid}\n' +
      'tach: {channel: 6, trigger_v: 2.5, max_rpm: 3000}\n' +
      'sensors:\n  - {id: A, channel: 0, bearing: DE, ' +
      'direction: vertical, sensitivity_mv_per_g: 100}\n';
    const ok = loadConfig(
      writeTmp(
        'gpio.yaml',
        head + 'gpio:\n  chip_label: pinctrl-bcm2711\n  tach_speed: {line: 23}\n',
      ),
    );
    expect(ok.gpio).toEqual({
      chip_label: 'pinctrl-bcm2711',
      tach_speed: {
        line: 23,
        active_low: false,
        pulses_per_rev: 1,
        average_revs: 4,
        tolerance_pct: 5,
      },
    });
    // One line, one purpose: the tach input may not sit on the advisory relay's line.
    const clash = writeTmp(
      'clash.yaml',
      head + 'advisory: {relay: {line: 17}, lamp: {line: 27}}\ngpio: {tach_speed: {line: 17}}\n',
    );
    expect(() => loadConfig(clash)).toThrow(
      /gpio\.tach_speed\.line: line 17 is already used by advisory\.relay\.line/,
    );
    // An unset max_rpm comes from the tach section (3000 here), so min_rpm 3500 cannot work.
    const speeds = writeTmp(
      'speeds.yaml',
      head + 'gpio: {tach_speed: {line: 23, min_rpm: 3500}}\n',
    );
    expect(() => loadConfig(speeds)).toThrow(
      /gpio\.tach_speed\.min_rpm: min_rpm 3500 must be below max_rpm 3000 \(an unset one is taken from the tach section\)/,
    );
    expect(() => loadConfig(writeTmp('typo.yaml', head + 'gpio: {chip: x}\n'))).toThrow(
      /gpio: unknown key\(s\) "chip"/,
    );
  });

  it('rejects unknown keys by name', () => {
    const f = writeTmp(
      'typo.yaml',
      'machine: {id: f1, group: 2, support: rigid, ' +
        'grup: 2}\ntach: {channel: 6, trigger_v: 2.5}\n' +
        'sensors:\n  - {id: A, channel: 0, bearing: DE, ' +
        'direction: vertical, sensitivity_mv_per_g: 100}\n',
    );
    expect(() => loadConfig(f)).toThrow(/machine: unknown key\(s\) "grup"/);
  });

  it('reports YAML syntax errors with a line number', () => {
    const f = writeTmp('syntax.yaml', 'machine:\n  id: [unclosed\n');
    expect(() => loadConfig(f)).toThrow(/not valid YAML at line \d+/);
  });

  it('reports a missing file', () => {
    expect(() => loadConfig('/nonexistent/turnwise.yaml')).toThrow(/config file not found/);
  });
});

describe('exported JSON Schema', () => {
  it('config/turnwise.schema.json is up to date with the zod schema (run `npm run schema`)', async () => {
    const { readFileSync } = await import('node:fs');
    const { configJsonSchema, CONFIG_SCHEMA_PATH } = await import('../agent/config/json-schema.js');
    const committed = JSON.parse(readFileSync(CONFIG_SCHEMA_PATH, 'utf8'));
    expect(committed).toEqual(JSON.parse(JSON.stringify(configJsonSchema())));
  });
});
