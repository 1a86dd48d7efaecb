import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { expectNoStack, runCli } from './support/cli.js';

/**
 * Bad watcher thresholds and cross-section mistakes, through the compiled CLI (`turnwise
 * check-config`).
 */
const dir = mkdtempSync(join(tmpdir(), 'tw-check-'));
const example = readFileSync('config/example.yaml', 'utf8');

function check(extra: string): ReturnType<typeof runCli> {
  const f = join(dir, `c${Math.random().toString(36).slice(2)}.yaml`);
  writeFileSync(f, `${example}\n${extra}\n`);
  return runCli(['check-config', f]);
}

describe('turnwise check-config refuses thresholds outside sense, with the path and the range', () => {
  it('a negative threshold', () => {
    const r = check('watcher:\n  sensor_health:\n    spike_ratio: -2');
    expect(r.code).toBe(2);
    expectNoStack(r.stderr);
    expect(r.stderr).toMatch(/watcher\.sensor_health\.spike_ratio/);
    expect(r.stderr).toMatch(/>=\s?3/);
  });

  it('a significance level above the C/D boundary (group 2 rigid: 4.5 mm/s, ISO 20816-3)', () => {
    const r = check('watcher:\n  unbalance:\n    significance: { basis: custom, overall_mm_s: 6 }');
    expect(r.code).toBe(2);
    expectNoStack(r.stderr);
    expect(r.stderr).toMatch(
      /watcher\.unbalance\.significance\.overall_mm_s: 6 mm\/s is above the C\/D boundary \(4\.5 mm\/s, ISO 20816-3 group 2, rigid support\)/,
    );
    expect(r.stderr).toMatch(/at most 4\.5 mm\/s/);
    expect(
      check('watcher:\n  unbalance:\n    significance: { basis: custom, overall_mm_s: 2 }').code,
    ).toBe(0);
  });

  it('watcher.baseline.channels and advisory.sensors naming sensors that do not exist (refused by run at start, now by check-config too)', () => {
    const b = check(
      'watcher:\n  baseline:\n    channels:\n' +
        '      XX-V: { one_x_rms_mm_s: 1, one_x_phase_deg: 10 }',
    );
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/watcher\.baseline\.channels\.XX-V: no sensor with id "XX-V"/);
    const a = check('advisory:\n  relay: { line: 5 }\n  sensors: [DE-V, XX-H]');
    expect(a.code).toBe(2);
    expectNoStack(a.stderr);
    expect(a.stderr).toMatch(/advisory\.sensors\[1\]: no sensor has id "XX-H"/);
  });
});
