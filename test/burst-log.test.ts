import { describe, expect, it } from 'vitest';
import { BurstLog } from '../agent/burst-log.js';
import { MemoryLogger } from '../agent/log.js';

describe('logging once per burst', () => {
  it('writes the first occurrence, a progress line while it lasts, and a summary when quiet', () => {
    let now = 0;
    const log = new MemoryLogger();
    const b = new BurstLog(log, { nowMs: () => now, quietMs: 10_000, summaryEveryMs: 60_000 });
    for (let k = 0; k < 1000; k++) {
      now = k * 100; // one CRC error every 100 ms for 100 s
      b.report('crc', `CRC mismatch in frame ${k}`);
      b.flush();
    }
    b.report('open_failed', 'device gone');
    expect(log.lines.map((l) => l.level)).toEqual(['warn', 'warn', 'warn']);
    expect(log.lines[0]!.msg).toMatch(
      /^CRC mismatch in frame 0 \(further "crc" problems are counted/,
    );
    expect(log.lines[1]!.msg).toBe(
      '"crc" still happening: 600 more in the last 60 s ' +
        '(601 in this burst); last: CRC mismatch in frame 600',
    );
    now += 10_000;
    b.flush();
    expect(log.lines[3]!.msg).toBe(
      '"crc" burst over: 1000 occurrence(s) in 99.9 s; last: CRC mismatch in frame 999',
    );
    // A new burst of the same problem starts with a line of its own again.
    b.report('crc', 'CRC mismatch in frame 5000');
    expect(log.lines.at(-1)!.msg).toMatch(/^CRC mismatch in frame 5000/);
    // A single occurrence gets no summary; ending all bursts at shutdown summarises the rest.
    b.flush(true);
    expect(log.lines.filter((l) => /burst over/.test(l.msg))).toHaveLength(1);
  });

  it('starts a new burst for another kind of problem under the same key, and after a quiet spell', () => {
    let now = 0;
    const log = new MemoryLogger();
    const b = new BurstLog(log, { nowMs: () => now, quietMs: 60_000 });
    expect(b.report('connect', 'connection refused', {}, 'refused')).toBe(true);
    now = 1000;
    expect(b.report('connect', 'connection refused', {}, 'refused')).toBe(false);
    now = 2000;
    // a different kind is said at once; the refused burst is summarised first
    expect(b.report('connect', 'bad user name or password', {}, 'auth')).toBe(true);
    expect(log.lines.map((l) => [l.level, l.msg.slice(0, 40)])).toEqual([
      ['warn', 'connection refused (further "connect" pr'],
      ['info', '"connect" burst over: 2 occurrence(s) in'],
      ['warn', 'bad user name or password (further "conn'],
    ]);
    // after a minute without one, the same problem is news again
    now = 62_000;
    expect(b.report('connect', 'bad user name or password', {}, 'auth')).toBe(true);
  });

  it('ends a burst when the caller says the problem is over, with the count and duration', () => {
    let now = 0;
    const log = new MemoryLogger();
    const b = new BurstLog(log, { nowMs: () => now, quietMs: Infinity });
    expect(b.resolved('connect', 'connected')).toBe(false);
    for (let k = 0; k < 5; k++) {
      now = k * 30_000; // one failed attempt every 30 s: never quiet long enough to end by itself
      b.report('connect', `attempt ${k} failed`);
    }
    b.flush();
    expect(b.isOpen('connect')).toBe(true);
    now = 125_000;
    expect(b.resolved('connect', 'connected after 5 failed attempts')).toBe(true);
    expect(b.isOpen('connect')).toBe(false);
    const last = log.lines.at(-1)!;
    expect(last).toMatchObject({ level: 'info', msg: 'connected after 5 failed attempts' });
    expect(last.fields).toMatchObject({ problem: 'connect', occurrences: 5, lasted_s: 125 });
  });
});
