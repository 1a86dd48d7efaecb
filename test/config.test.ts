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
      'machine: {id: f1, group: 3, support: rigid}\ntach: {channel: 6, trigger_v: 2.5}\nsensors:\n  - {id: A, channel: 6, bearing: DE, direction: sideways, sensitivity_mv_per_g: 100}\n',
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
      'machine: {id: f1, group: 2, support: rigid}\ntach: {channel: 6, trigger_v: 2.5}\nsensors:\n  - {id: A, channel: 6, bearing: DE, direction: vertical, sensitivity_mv_per_g: 100}\n  - {id: A, channel: 1, bearing: DE, direction: horizontal, sensitivity_mv_per_g: 100}\n',
    );
    expect(() => loadConfig(f)).toThrow(/sensors\[0\]\.channel: channel 6 is the tach channel/);
    expect(() => loadConfig(f)).toThrow(/sensors\[1\]\.id: sensor id "A" is already used by sensors\[0\]/);
  });

  it('rejects unknown keys by name', () => {
    const f = writeTmp('typo.yaml', 'machine: {id: f1, group: 2, support: rigid, grup: 2}\ntach: {channel: 6, trigger_v: 2.5}\nsensors:\n  - {id: A, channel: 0, bearing: DE, direction: vertical, sensitivity_mv_per_g: 100}\n');
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
