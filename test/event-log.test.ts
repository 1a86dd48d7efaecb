import { appendFileSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { AgentEvent } from '../agent/events.js';
import { EventLog, readEventLog } from '../agent/eventlog/event-log.js';
import { CaptureLog } from './support/capture-log.js';
import { expectNoStack, runCli } from './support/cli.js';
import { testResources } from './support/harness.js';

/**
 * The agent's own event log under state_dir (real files, fsync), and `turnwise events` reading it
 * as a real process, the way a technician reads an alarm's history after the board rebooted.
 */

const res = testResources('tw-evlog-');
const ASSET = 'kessrow-id3a'; // invented demo fan

function ev(
  i: number,
  tsMs: number,
  type = 'zone_changed',
  severity: AgentEvent['severity'] = 'warning',
  extra: Record<string, unknown> = {},
): AgentEvent {
  return {
    id: `ev-${i}`,
    ts: new Date(tsMs).toISOString(),
    asset: ASSET,
    type,
    severity,
    zone: 'C',
    channel: 'DE-V',
    ...extra,
  };
}

function configFile(stateDir: string, extra = ''): string {
  const file = join(res.tmpDir(), 'turnwise.yaml');
  writeFileSync(
    file,
    `machine: { id: ${ASSET}, group: 2, support: rigid }
tach: { channel: 2, trigger_v: 2.5 }
sensors:
  - { id: DE-V, channel: 0, bearing: DE, direction: vertical, sensitivity_mv_per_g: 100 }
  - { id: DE-H, channel: 1, bearing: DE, direction: horizontal, sensitivity_mv_per_g: 100 }
state_dir: ${stateDir}
${extra}`,
  );
  return file;
}

describe('event log under state_dir', () => {
  it('keeps every event across a restart, oldest first, and filters by time, type and severity', () => {
    const dir = res.tmpDir();
    const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
    const a = new EventLog({ stateDir: dir, maxBytes: 1024 * 1024, log: new CaptureLog() });
    a.append(ev(1, t0));
    a.append(ev(2, t0 + 60_000, 'advisory_raised', 'alarm', { message: 'zone D at bearing DE' }));
    a.close(); // the agent stops (or the board reboots after the fsync)
    const b = new EventLog({ stateDir: dir, maxBytes: 1024 * 1024, log: new CaptureLog() });
    b.append(ev(3, t0 + 120_000, 'zone_changed', 'info'));
    b.close();
    expect(readEventLog(dir).events.map((e) => e.id)).toEqual(['ev-1', 'ev-2', 'ev-3']);
    expect(readEventLog(dir, { sinceMs: t0 + 30_000 }).events.map((e) => e.id)).toEqual([
      'ev-2',
      'ev-3',
    ]);
    expect(readEventLog(dir, { untilMs: t0 + 60_000 }).events.map((e) => e.id)).toEqual([
      'ev-1',
      'ev-2',
    ]);
    expect(readEventLog(dir, { types: ['advisory_raised'] }).events.map((e) => e.id)).toEqual([
      'ev-2',
    ]);
    expect(readEventLog(dir, { minSeverity: 'warning' }).events.map((e) => e.id)).toEqual([
      'ev-1',
      'ev-2',
    ]);
  });

  it('stays within max bytes by dropping the oldest half, and keeps the newest events', () => {
    const dir = res.tmpDir();
    const max = 64 * 1024;
    const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
    const log = new EventLog({ stateDir: dir, maxBytes: max, log: new CaptureLog() });
    const N = 2000; // about 170 bytes each: some 340 KB in all, five times the bound
    for (let i = 0; i < N; i++) {
      log.append(ev(i, t0 + i * 1000));
      if (i % 50 === 49) log.flush();
    }
    log.close();
    const files = readdirSync(join(dir, 'events'));
    const total = files.reduce((s, f) => s + statSync(join(dir, 'events', f)).size, 0);
    expect(total).toBeLessThanOrEqual(max);
    expect(total).toBeGreaterThan(max / 4); // not emptied either
    const kept = readEventLog(dir).events;
    expect(kept.at(-1)!.id).toBe(`ev-${N - 1}`);
    expect(kept[0].id).not.toBe('ev-0');
    // What is kept has no holes: one run of consecutive events up to the newest.
    const ids = kept.map((e) => Number(e.id.slice(3)));
    expect(ids).toEqual(ids.map((_, k) => ids[0] + k));
  });

  it('skips a torn last line (power cut mid-write) and counts it; a refused directory is said once, nothing crashes', () => {
    const dir = res.tmpDir();
    const t0 = Date.UTC(2026, 11, 2, 6, 0, 0);
    const l = new EventLog({ stateDir: dir, maxBytes: 1024 * 1024, log: new CaptureLog() });
    l.append(ev(1, t0));
    l.close();
    appendFileSync(join(dir, 'events', 'events.jsonl'), '{"id":"ev-2","ts":"2026-12-02T06:0');
    const r = readEventLog(dir);
    expect(r.events.map((e) => e.id)).toEqual(['ev-1']);
    expect(r.skipped).toBe(1);

    const blocked = join(res.tmpDir(), 'file-not-dir');
    writeFileSync(blocked, 'x'); // state_dir is a file: mkdir fails with EEXIST/ENOTDIR
    const cl = new CaptureLog();
    const bad = new EventLog({ stateDir: blocked, maxBytes: 1024 * 1024, log: cl });
    for (let i = 0; i < 5; i++) {
      bad.append(ev(i, t0));
      bad.flush();
    }
    expect(cl.matching(/cannot write the event log/)).toHaveLength(1);
    expect(bad.health()).toMatchObject({ event_log_failed_total: 5, event_log_ok: false });
  });
});

describe('turnwise events (compiled CLI, real process)', () => {
  it('lists the kept events as a table and as JSON, with --since as a duration or a date', () => {
    const state = res.tmpDir();
    const now = Date.now();
    const l = new EventLog({ stateDir: state, maxBytes: 1024 * 1024, log: new CaptureLog() });
    l.append(ev(1, now - 3 * 3600_000, 'zone_changed', 'warning'));
    l.append(
      ev(2, now - 30 * 60_000, 'advisory_raised', 'alarm', {
        message: 'zone D at bearing DE: stop advisory raised',
      }),
    );
    l.append(ev(3, now - 60_000, 'baseline_learned', 'info'));
    l.close();
    const cfg = configFile(state);

    const table = runCli(['events', '--config', cfg, '--since', '1h']);
    expect(table.code).toBe(0);
    expect(table.stdout).toMatch(/time \(UTC\)\s+severity\s+type\s+what/);
    expect(table.stdout).toMatch(
      /alarm\s+advisory_raised\s+zone D at bearing DE: stop advisory raised/,
    );
    expect(table.stdout).not.toMatch(/zone_changed/);
    expect(table.stdout).toMatch(/2 event\(s\)/);

    const j = runCli([
      'events',
      '--config',
      cfg,
      '--since',
      new Date(now - 4 * 3600_000).toISOString(),
      '--severity',
      'warning',
      '--json',
    ]);
    expect(j.code).toBe(0);
    const out = JSON.parse(j.stdout) as { count: number; events: AgentEvent[] };
    expect(out.events.map((e) => e.id)).toEqual(['ev-1', 'ev-2']);

    const typed = JSON.parse(
      runCli(['events', '--config', cfg, '--type', 'baseline_learned,zone_changed', '--json'])
        .stdout,
    ) as { events: AgentEvent[] };
    expect(typed.events.map((e) => e.id)).toEqual(['ev-1', 'ev-3']);
  });

  it('says what is wrong with a bad --since or --severity (exit 2, no stack), and when there is no log yet', () => {
    const state = res.tmpDir();
    const cfg = configFile(state);
    const none = runCli(['events', '--config', cfg]);
    expect(none.code).toBe(0);
    expect(none.stdout).toMatch(/no event log under .* yet/);
    const bad = runCli(['events', '--config', cfg, '--since', 'yesterday']);
    expect(bad.code).toBe(2);
    expectNoStack(bad.stderr);
    expect(bad.stderr).toMatch(/--since/);
    expect(bad.stderr).toMatch(/"yesterday" is neither a duration nor a date/);
    expect(bad.stderr).toMatch(/2h, 7d/);
    const sev = runCli(['events', '--config', cfg, '--severity', 'critical']);
    expect(sev.code).toBe(2);
    expect(sev.stderr).toMatch(/"critical" is not a severity/);
    const order = runCli(['events', '--config', cfg, '--since', '1h', '--until', '2h']);
    expect(order.code).toBe(2);
    expect(order.stderr).toMatch(/--until.*before --since/s);
  });
});
