import { describe, expect, it } from 'vitest';
import { copyFileSync, existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import {
  defaultLastGoodPath,
  fallbackConfig,
  keepLastGood,
  loadGuardedConfig,
} from '../agent/runtime/config-guard.js';
import { UserError } from '../agent/errors.js';

describe('a bad config on the board', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tw-guard-'));
  const cfg = join(dir, 'turnwise.yaml');
  const lastGood = join(dir, 'state', 'last-good-config.yaml');

  it('loading keeps no copy; a config becomes last good only when the agent has measured with it (keepLastGood)', () => {
    copyFileSync('config/example.yaml', cfg);
    const g = loadGuardedConfig(cfg, lastGood);
    expect(g.rejected).toBeUndefined();
    expect(g.from).toBe(cfg);
    expect(existsSync(lastGood)).toBe(false);
    keepLastGood(cfg, lastGood, (e) => {
      throw e;
    });
    expect(readFileSync(lastGood, 'utf8')).toBe(readFileSync(cfg, 'utf8'));
    // a copy that cannot be kept is reported, never thrown
    const errors: Error[] = [];
    keepLastGood(join(dir, 'missing.yaml'), lastGood, (e) => errors.push(e));
    expect(errors).toHaveLength(1);
  });

  it('does not fall back to a last good copy that is the failing config itself', () => {
    const why = new UserError(cfg, 'failed at start-up', 'fix it');
    expect(fallbackConfig(cfg, lastGood, why)).toBeNull(); // same text as the copy
    expect(fallbackConfig(cfg, join(dir, 'none.yaml'), why)).toBeNull();
  });

  it('runs on the last good copy and says why when the new one is broken', () => {
    writeFileSync(cfg, 'machine: {id: kessrow-id3a, group: 5, support: rigid}\n');
    const g = loadGuardedConfig(cfg, lastGood);
    expect(g.from).toBe(lastGood);
    expect(g.config.machine.id).toBe('kessrow-id3a');
    expect(g.rejected?.message).toMatch(/machine\.group/);
  });

  it('refuses to start without a last good copy', () => {
    expect(() => loadGuardedConfig(cfg, join(dir, 'none.yaml'))).toThrow(/machine\.group/);
  });

  it('keeps the last good copy where systemd says state lives', () => {
    expect(defaultLastGoodPath({ STATE_DIRECTORY: '/var/lib/turnwise' })).toBe(
      '/var/lib/turnwise/last-good-config.yaml',
    );
    expect(defaultLastGoodPath({})).toBe('state/last-good-config.yaml');
  });
});
