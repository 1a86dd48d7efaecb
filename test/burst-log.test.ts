import { describe, expect, it } from 'vitest';
import { MemoryLogger } from '../agent/log.js';
import { BurstLog } from '../agent/logging/burst.js';
import { FakeTimers } from './support/fake-timers.js';

const SEC = 1000;
const MIN = 60 * SEC;

function setup(opts?: ConstructorParameters<typeof BurstLog>[2]) {
  const log = new MemoryLogger();
  const timers = new FakeTimers();
  const burst = new BurstLog(log, timers, opts);
  return { log, timers, burst, t0: timers.nowMs() };
}

describe('BurstLog: once per burst', () => {
  it('logs the first occurrence in full, then only counts, then one closing line once quiet', () => {
    const { log, timers, burst, t0 } = setup({ quietMs: 2 * MIN, summaryEveryMs: 10 * MIN });
    // A device that refuses every second for 30 s.
    for (let i = 0; i < 30; i++) {
      burst.warn('daq-open', { device: '/dev/turnwise-daq', errno: 'EBUSY' }, 'cannot open the acquisition board');
      timers.advance(SEC);
    }
    expect(log.lines).toHaveLength(1);
    expect(log.lines[0]).toEqual({
      level: 'warn',
      msg: 'cannot open the acquisition board',
      fields: { device: '/dev/turnwise-daq', errno: 'EBUSY', burst: 'daq-open' },
    });
    // Last occurrence at t0 + 29 s; quiet for 2 min closes it at t0 + 149 s, not before.
    timers.advance(148 * SEC - 30 * SEC);
    expect(log.lines).toHaveLength(1);
    timers.advance(2 * SEC);
    expect(log.lines).toHaveLength(2);
    const close = log.lines[1]!;
    expect(close.level).toBe('info');
    expect(close.fields).toMatchObject({
      burst: 'daq-open',
      count_total: 30,
      count: 29,
      duration_s: 29,
      first_at: new Date(t0).toISOString(),
      last_at: new Date(t0 + 29 * SEC).toISOString(),
      ended: 'quiet',
    });
    expect(close.msg).toMatch(/^cannot open the acquisition board: not seen for 120 s; 30 occurrence\(s\) from /);
    expect(burst.openCount).toBe(0);
    expect(timers.pendingCount).toBe(0);

    // The same problem later starts a new burst with a full first line.
    burst.warn('daq-open', { device: '/dev/turnwise-daq' }, 'cannot open the acquisition board');
    expect(log.lines).toHaveLength(3);
    expect(log.lines[2]!.level).toBe('warn');
  });

  it('writes a summary every N minutes while the problem goes on', () => {
    const { log, timers, burst } = setup({ quietMs: 2 * MIN, summaryEveryMs: 10 * MIN });
    // Every 10 s for 35 min: 210 occurrences.
    for (let i = 0; i < 210; i++) {
      burst.error('broker', { host: 'broker.kessrow.invalid' }, 'MQTT broker refused the connection');
      timers.advance(10 * SEC);
    }
    // first line + summaries at 10, 20 and 30 min
    expect(log.lines.map((l) => l.level)).toEqual(['error', 'error', 'error', 'error']);
    const counts = log.lines.slice(1).map((l) => [l.fields.count, l.fields.count_total, l.fields.window_s]);
    // At 10 min the 61st occurrence (t = 600 s) has not happened yet when the timer fires first.
    expect(counts).toEqual([
      [59, 60, 600],
      [60, 120, 600],
      [60, 180, 600],
    ]);
    expect(log.lines[1]!.msg).toMatch(/^MQTT broker refused the connection \(still happening: 59 more in the last 600 s, 60 since /);
    timers.advance(3 * MIN);
    const last = log.lines.at(-1)!;
    expect(last.level).toBe('info');
    expect(last.fields).toMatchObject({ count_total: 210, count: 30, ended: 'quiet', duration_s: 2090 });
  });

  it('resolve() closes the burst at once; a lone occurrence that ends by itself gets no second line', () => {
    const { log, timers, burst } = setup({ quietMs: MIN });
    burst.warn('tach', {}, 'tach pulses missing');
    timers.advance(5 * SEC);
    burst.warn('tach', {}, 'tach pulses missing');
    burst.resolve('tach');
    expect(log.lines.map((l) => [l.level, l.fields.ended ?? null, l.fields.count_total ?? null])).toEqual([
      ['warn', null, null],
      ['info', 'resolved', 2],
    ]);
    burst.resolve('tach'); // nothing open: silent
    burst.resolve('never-seen');
    expect(log.lines).toHaveLength(2);

    burst.warn('clip', { channel: 'NDE-H' }, 'channel clipped');
    timers.advance(2 * MIN);
    expect(log.lines).toHaveLength(3); // only the first line
    expect(timers.pendingCount).toBe(0);
  });

  it('keeps problems apart by key and closes all open ones at shutdown', () => {
    const { log, burst } = setup();
    burst.warn('a', {}, 'problem A');
    burst.error('b', {}, 'problem B');
    burst.warn('a', {}, 'problem A');
    expect(log.lines.map((l) => l.msg)).toEqual(['problem A', 'problem B']);
    burst.flush();
    expect(log.lines.slice(2).map((l) => [l.fields.burst, l.fields.count_total, l.fields.ended])).toEqual([
      ['a', 2, 'shutdown'],
      ['b', 1, 'shutdown'],
    ]);
    expect(burst.openCount).toBe(0);
  });

  it('tracks at most maxOpen problems, closing the oldest with a line that says so', () => {
    const { log, burst } = setup({ maxOpen: 2 });
    burst.warn('a', {}, 'A');
    burst.warn('b', {}, 'B');
    burst.warn('c', {}, 'C');
    expect(burst.openCount).toBe(2);
    expect(log.lines.map((l) => [l.msg.split(':')[0], l.fields.ended ?? null])).toEqual([
      ['A', null],
      ['B', null],
      ['A', 'evicted'],
      ['C', null],
    ]);
  });

  it('refuses nonsense settings', () => {
    expect(() => setup({ quietMs: 0 })).toThrow(/must be positive/);
    expect(() => setup({ summaryEveryMs: -1 })).toThrow(/must be positive/);
  });
});
