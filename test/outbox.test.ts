import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { UserError } from '../agent/errors.js';
import type { AgentEvent } from '../agent/events.js';
import { nodeOutboxFs, type OutboxFs } from '../agent/outbox/fs.js';
import { Outbox, recordName, type OutboxNotice } from '../agent/outbox/outbox.js';
import { decodeRecord, encodeRecord } from '../agent/outbox/record.js';
import { fillUp, tryMountTmpfs, unmountTmpfs } from './support/tmpfs.js';

const dirs: string[] = [];
function tmp(): string {
  const d = mkdtempSync(join(tmpdir(), 'tw-outbox-'));
  dirs.push(d);
  return d;
}
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

function ev(i: number, severity: AgentEvent['severity'] = 'info'): AgentEvent {
  return {
    id: `id-${i}`,
    ts: '2025-01-01T00:00:00.000Z',
    asset: 'kessrow-id3a',
    type: 'test_step',
    severity,
    step: i,
  };
}

function recFiles(dir: string): string[] {
  return readdirSync(dir)
    .filter((n) => n.endsWith('.rec'))
    .sort();
}

/** Waits for queued notices (they are delivered on a microtask). */
const tickOnce = () => new Promise((r) => setImmediate(r));

describe('outbox record format', () => {
  it('round-trips and detects every kind of damage', () => {
    const json = JSON.stringify(ev(1, 'alarm'));
    const buf = encodeRecord(json);
    expect(decodeRecord(buf)).toMatchObject({ id: 'id-1', severity: 'alarm', json });
    const flipped = Buffer.from(buf);
    flipped[flipped.length - 5] ^= 0x01;
    expect(decodeRecord(flipped)).toEqual({ problem: expect.stringMatching(/checksum mismatch/) });
    expect(decodeRecord(buf.subarray(0, buf.length - 10))).toEqual({
      problem: expect.stringMatching(/cut short/),
    });
    expect(decodeRecord(Buffer.alloc(0))).toEqual({ problem: expect.stringMatching(/empty file/) });
    expect(decodeRecord(Buffer.from('hello world\n'))).toEqual({
      problem: expect.stringMatching(/unknown record header/),
    });
    expect(decodeRecord(Buffer.concat([buf, Buffer.from('xx')]))).toEqual({
      problem: expect.stringMatching(/trailing/),
    });
    expect(decodeRecord(encodeRecord('{"id": 3}'))).toEqual({
      problem: expect.stringMatching(/lacks a string id/),
    });
    expect(decodeRecord(encodeRecord('{not json'))).toEqual({
      problem: expect.stringMatching(/not valid JSON/),
    });
  });
});

describe('durable outbox on real files', () => {
  it('saves (write, fsync, rename, directory fsync) before an event becomes sendable', async () => {
    const dir = tmp();
    const calls: string[] = [];
    const fs: OutboxFs = {
      ...nodeOutboxFs,
      writeNewSynced: async (f, d) => {
        calls.push(`write+fsync ${f.split('/').pop()}`);
        await nodeOutboxFs.writeNewSynced(f, d);
      },
      rename: async (a, b) => {
        calls.push(`rename ${a.split('/').pop()} -> ${b.split('/').pop()}`);
        await nodeOutboxFs.rename(a, b);
      },
      syncDir: async (d) => {
        calls.push(`fsync dir ${d === dir ? 'outbox' : d}`);
        await nodeOutboxFs.syncDir(d);
      },
    };
    const ob = await Outbox.open({ dir, fs });
    const p = ob.add(ev(1, 'alarm'));
    expect([...ob.sendable()]).toHaveLength(0); // not on disk yet: not publishable
    expect(await p).toBe('durable');
    const name = recordName(1);
    expect(calls).toEqual([
      `write+fsync ${name}.tmp`,
      `rename ${name}.tmp -> ${name}`,
      'fsync dir outbox',
    ]);
    expect([...ob.sendable()].map((e) => e.id)).toEqual(['id-1']);
    expect(decodeRecord(readFileSync(join(dir, name)))).toMatchObject({ id: 'id-1' });
    await ob.close();
  });

  it('keeps order and bytes across a restart and deletes a file only on ack', async () => {
    const dir = tmp();
    const a = await Outbox.open({ dir });
    for (let i = 0; i < 5; i++) await a.add(ev(i, i === 2 ? 'alarm' : 'warning'));
    const before = [...a.sendable()].map((e) => e.json);
    a.ack([...a.sendable()][1]!.seq);
    await a.close();
    expect(recFiles(dir)).toHaveLength(4);

    const b = await Outbox.open({ dir });
    const after = [...b.sendable()];
    expect(after.map((e) => e.id)).toEqual(['id-0', 'id-2', 'id-3', 'id-4']);
    expect(after.map((e) => e.json)).toEqual([before[0], before[2], before[3], before[4]]);
    // New events continue the sequence after the highest one found on disk.
    await b.add(ev(9));
    expect([...b.sendable()].map((e) => e.seq)).toEqual([1, 3, 4, 5, 6]);
    await b.close();
  });

  it('drops info first, then warnings, oldest first, never an alarm, and reports the burst once', async () => {
    const dir = tmp();
    const notices: OutboxNotice[] = [];
    const ob = await Outbox.open({ dir, maxEvents: 4, onNotice: (n) => notices.push(n) });
    // severities in order of arrival: alarm, info, warning, info, then more
    await ob.add(ev(0, 'alarm'));
    await ob.add(ev(1, 'info'));
    await ob.add(ev(2, 'warning'));
    await ob.add(ev(3, 'info'));
    expect(await ob.add(ev(4, 'warning'))).toBe('durable'); // drops id-1 (oldest info)
    expect([...ob.sendable()].map((e) => e.id)).toEqual(['id-0', 'id-2', 'id-3', 'id-4']);
    expect(await ob.add(ev(5, 'info'))).toBe('durable'); // drops id-3 (oldest info)
    // drops id-5 (the only info left, the newest)
    expect(await ob.add(ev(6, 'alarm'))).toBe('durable');
    expect(await ob.add(ev(7, 'alarm'))).toBe('durable'); // drops id-2 (oldest warning)
    expect(await ob.add(ev(8, 'alarm'))).toBe('durable'); // drops id-4
    expect([...ob.sendable()].map((e) => e.id)).toEqual(['id-0', 'id-6', 'id-7', 'id-8']);
    // Only alarms left: a new info event is the one given up; a new alarm goes over the limit.
    expect(await ob.add(ev(9, 'info'))).toBe('dropped');
    expect(await ob.add(ev(10, 'alarm'))).toBe('durable');
    expect(ob.size).toBe(5);
    expect(ob.health()).toMatchObject({
      full: true,
      dropped_info_total: 4,
      dropped_warning_total: 2,
    });
    await ob.settled();
    expect(recFiles(dir)).toHaveLength(5);
    await tickOnce();
    expect(notices.filter((n) => n.kind === 'overflow_started')).toHaveLength(1);
    // Acknowledging down to 90 % of the limit ends the burst, with the counts.
    for (const e of [...ob.sendable()].slice(0, 2)) ob.ack(e.seq);
    await tickOnce();
    expect(notices.find((n) => n.kind === 'overflow_ended')).toMatchObject({
      dropped_info: 4,
      dropped_warning: 2,
    });
    await ob.close();
  });

  it('quarantines damaged and torn files, finishes a complete unrenamed save, and never throws', async () => {
    const dir = tmp();
    const good = (i: number, sev: AgentEvent['severity'] = 'warning') =>
      encodeRecord(JSON.stringify(ev(i, sev)));
    writeFileSync(join(dir, recordName(1)), good(1));
    const damaged = Buffer.from(good(2));
    damaged[damaged.length - 4] ^= 0x20;
    writeFileSync(join(dir, recordName(2)), damaged);
    writeFileSync(join(dir, recordName(3)), good(3).subarray(0, 30)); // cut short
    // complete, rename never happened
    writeFileSync(join(dir, recordName(4) + '.tmp'), good(4, 'alarm'));
    writeFileSync(join(dir, recordName(5) + '.tmp'), Buffer.alloc(0)); // killed right after open()
    writeFileSync(join(dir, recordName(6)), 'garbage that is not a record');
    writeFileSync(join(dir, recordName(7)), good(7));
    const notices: OutboxNotice[] = [];
    const ob = await Outbox.open({ dir, onNotice: (n) => notices.push(n) });
    expect([...ob.sendable()].map((e) => e.id)).toEqual(['id-1', 'id-4', 'id-7']);
    expect(recFiles(dir)).toEqual([recordName(1), recordName(4), recordName(7)]);
    expect(readdirSync(dir).filter((n) => n.endsWith('.tmp'))).toEqual([]);
    const q = readdirSync(join(dir, 'quarantine')).sort();
    expect(q).toHaveLength(4);
    expect(q.map((n) => n.slice(0, 20))).toEqual(
      [recordName(2), recordName(3), recordName(5) + '.tm', recordName(6)].map((n) =>
        n.slice(0, 20),
      ),
    );
    await tickOnce();
    const problems = notices
      .filter((n) => n.kind === 'quarantined')
      .map((n) => (n as { problem: string }).problem);
    expect(problems).toEqual([
      expect.stringMatching(/checksum/),
      expect.stringMatching(/cut short/),
      expect.stringMatching(/^unfinished save: empty file/),
      expect.stringMatching(/header/),
    ]);
    expect(ob.health().quarantined_total).toBe(4);
    expect(await ob.add(ev(8))).toBe('durable');
    expect([...ob.sendable()].at(-1)!.seq).toBe(8);
    await ob.close();
  });

  it('keeps events in memory when the disk is full, says so once, and saves them when space returns (injected ENOSPC)', async () => {
    const dir = tmp();
    let full = false;
    let writes = 0;
    const fs: OutboxFs = {
      ...nodeOutboxFs,
      writeNewSynced: async (f, d) => {
        writes++;
        if (full)
          throw Object.assign(new Error('ENOSPC: no space left on device, write'), {
            code: 'ENOSPC',
          });
        await nodeOutboxFs.writeNewSynced(f, d);
      },
    };
    const notices: OutboxNotice[] = [];
    const ob = await Outbox.open({
      dir,
      fs,
      retryMinMs: 20,
      retryMaxMs: 40,
      onNotice: (n) => notices.push(n),
    });
    expect(await ob.add(ev(0, 'warning'))).toBe('durable');
    full = true;
    const outcomes = [];
    for (let i = 1; i <= 6; i++) outcomes.push(await ob.add(ev(i, i === 3 ? 'alarm' : 'info')));
    expect(outcomes).toEqual(Array(6).fill('memory'));
    // Still publishable, in order, while the disk refuses them.
    expect([...ob.sendable()].map((e) => e.id)).toEqual([
      'id-0',
      'id-1',
      'id-2',
      'id-3',
      'id-4',
      'id-5',
      'id-6',
    ]);
    expect(ob.health()).toMatchObject({ store_ok: false, memory_only: 6 });
    await new Promise((r) => setTimeout(r, 150)); // a few retries fail
    await tickOnce();
    expect(notices.filter((n) => n.kind === 'store_failed')).toEqual([
      { kind: 'store_failed', code: 'ENOSPC', message: expect.stringMatching(/no space/) },
    ]);
    const retriesWhileFull = writes;
    expect(retriesWhileFull).toBeGreaterThan(2);
    ob.ack(2); // id-1 delivered from memory while the disk was full: it need never be saved
    full = false;
    const until = Date.now() + 3000;
    while (!ob.health().store_ok && Date.now() < until) await new Promise((r) => setTimeout(r, 10));
    await ob.settled();
    await tickOnce();
    expect(notices.filter((n) => n.kind === 'store_recovered')).toEqual([
      expect.objectContaining({ saved_late: 5 }),
    ]);
    expect(recFiles(dir)).toEqual([0, 2, 3, 4, 5, 6].map((i) => recordName(i + 1)));
    expect(ob.health()).toMatchObject({
      store_ok: true,
      memory_only: 0,
      store_failures_total: expect.any(Number),
    });
    await ob.close();
  });

  it('refuses a state directory it cannot use with a UserError that says what to do', async () => {
    const d = tmp();
    writeFileSync(join(d, 'state'), 'a file where the directory should be');
    const err = await Outbox.open({ dir: join(d, 'state', 'outbox') }).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(UserError);
    expect((err as UserError).format()).toMatch(
      /cannot use the outbox directory \(ENOTDIR\)[\s\S]*state_dir/,
    );
  });
});

describe('durable outbox on a real full tmpfs', () => {
  it('reports ENOSPC once, keeps accepting events, and recovers by itself when space is freed (needs root to mount)', async (ctx) => {
    const mnt = tryMountTmpfs();
    if (!mnt)
      return ctx.skip(
        'cannot mount a tmpfs here (not root or no CAP_SYS_ADMIN); ' +
          'the injected-ENOSPC test covers the same path',
      );
    try {
      const dir = join(mnt, 'outbox');
      const notices: OutboxNotice[] = [];
      const ob = await Outbox.open({
        dir,
        retryMinMs: 20,
        retryMaxMs: 50,
        onNotice: (n) => notices.push(n),
      });
      const { code, ballast } = fillUp(mnt);
      expect(code).toBe('ENOSPC');
      const outcomes = [];
      for (let i = 0; i < 5; i++) outcomes.push(await ob.add(ev(i, 'alarm')));
      expect(outcomes).toEqual(Array(5).fill('memory'));
      await tickOnce();
      expect(notices.filter((n) => n.kind === 'store_failed')).toEqual([
        expect.objectContaining({ code: 'ENOSPC' }),
      ]);
      // nothing half-written left behind
      expect(readdirSync(dir).filter((n) => n.includes('.rec'))).toEqual([]);
      rmSync(ballast);
      const until = Date.now() + 3000;
      while (!ob.health().store_ok && Date.now() < until)
        await new Promise((r) => setTimeout(r, 10));
      await ob.settled();
      expect(recFiles(dir)).toHaveLength(5);
      await tickOnce();
      expect(notices.filter((n) => n.kind === 'store_recovered')).toHaveLength(1);
      await ob.close();
    } finally {
      unmountTmpfs(mnt);
    }
  });
});
