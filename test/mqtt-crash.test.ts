import { spawn, type ChildProcess } from 'node:child_process';
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { createInterface } from 'node:readline';
import { describe, expect, it } from 'vitest';
import { testResources, uniquePrefix } from './support/harness.js';
import { freePort, Mosquitto } from './support/mosquitto.js';
import { assertMatches } from './support/payload-schemas.js';
import { TestSubscriber } from './support/subscriber.js';
import { HoldingProxy } from './support/tcp-proxy.js';

/**
 * The agent side killed with SIGKILL (no chance to flush or say goodbye) at the points that matter:
 * with events on disk and the broker down, between publish and PUBACK, and at random moments while
 * events are being saved and published. The child runs the real outbox and publisher
 * (test/support/link-child.ts) on real files and a real mosquitto.
 */

const ASSET = 'kessrow-id3a'; // invented demo fan
const ROOT = join(import.meta.dirname, '..');
const res = testResources('tw-crash-');

interface Child {
  readonly proc: ChildProcess;
  readonly lines: Array<Record<string, unknown>>;
  waitFor(
    pred: (l: Record<string, unknown>) => boolean,
    ms: number,
    what: string,
  ): Promise<Record<string, unknown>>;
  exited: Promise<number | null>;
}

function startChild(args: Record<string, unknown>): Child {
  const proc = spawn(
    process.execPath,
    ['--import', './test/support/ts-hooks.mjs', 'test/support/link-child.ts', JSON.stringify(args)],
    { cwd: ROOT, stdio: ['pipe', 'pipe', 'pipe'] },
  );
  const lines: Array<Record<string, unknown>> = [];
  let stderr = '';
  proc.stderr!.on('data', (d: Buffer) => (stderr += d.toString()));
  createInterface({ input: proc.stdout! }).on('line', (l) => {
    try {
      lines.push(JSON.parse(l) as Record<string, unknown>);
    } catch {
      lines.push({ raw: l });
    }
  });
  const exited = new Promise<number | null>((r) => proc.once('exit', (code) => r(code)));
  res.defer(() => {
    if (proc.exitCode === null && proc.signalCode === null) proc.kill('SIGKILL');
    return exited;
  });
  return {
    proc,
    lines,
    exited,
    async waitFor(pred, ms, what) {
      const until = Date.now() + ms;
      for (;;) {
        const hit = lines.find(pred);
        if (hit) return hit;
        if (proc.exitCode !== null || Date.now() > until)
          throw new Error(
            `child: no ${what} (exit ${proc.exitCode}); stdout: ` +
              `${JSON.stringify(lines.slice(-5))}; stderr: ${stderr.slice(-2000)}`,
          );
        await new Promise((r) => setTimeout(r, 20));
      }
    },
  };
}

async function killHard(c: Child): Promise<void> {
  c.proc.kill('SIGKILL');
  await c.exited;
}

/** A broker, a plant-side subscriber to the event topics, and an empty state directory. */
async function scene(filters: (base: string) => string[] = (b) => [`${b}/event/#`]) {
  const broker = await Mosquitto.start();
  res.defer(() => broker.dispose());
  const prefix = uniquePrefix();
  const base = `${prefix}/${ASSET}`;
  const sub = await TestSubscriber.open(broker.url, filters(base));
  res.defer(() => sub.close());
  return { broker, prefix, base, sub, stateDir: res.tmpDir() };
}
const recs = (stateDir: string) =>
  readdirSync(join(stateDir, 'outbox')).filter((n) => n.endsWith('.rec'));

// Child processes start slowly on a busy 2-core machine (Node + module hooks): generous timeouts.
const SLOW = 180_000;

describe('agent killed with SIGKILL (child process, real files, real mosquitto)', () => {
  it(
    'events saved while the broker was unreachable survive kill -9 and go out once, in order, after restart',
    async () => {
      const { broker, prefix, sub, stateDir } = await scene();
      const deadUrl = `mqtt://127.0.0.1:${await freePort()}`;

      const a = startChild({
        url: deadUrl,
        prefix,
        asset: ASSET,
        stateDir,
        mode: 'add',
        count: 12,
      });
      await a.waitFor((l) => l.all_durable === true, 60_000, 'all events durable');
      await killHard(a);
      expect(recs(stateDir)).toHaveLength(12);

      const b = startChild({ url: broker.url, prefix, asset: ASSET, stateDir, mode: 'drain' });
      await b.waitFor((l) => 'drained' in l, 60_000, 'drain');
      expect(await b.exited).toBe(0);
      await sub.waitFor((m) => m.length >= 12, 5000, 'twelve events');
      const ids = sub.messages.map((m) => (m.json as { id: string }).id);
      expect(ids).toEqual(Array.from({ length: 12 }, (_, i) => `ev-${String(i).padStart(5, '0')}`));
      for (const m of sub.messages) assertMatches('event.v1', m.json);
      expect(recs(stateDir)).toEqual([]);
    },
    SLOW,
  );

  it(
    'kill -9 between publish and PUBACK: the events are sent again after restart with the same ids and bytes; the last-will says "connection lost"',
    async () => {
      const { broker, prefix, base, sub, stateDir } = await scene((b) => [
        `${b}/event/#`,
        `${b}/status`,
      ]);
      const proxy = await HoldingProxy.start(broker.port);
      res.defer(() => proxy.close());

      const a = startChild({
        url: proxy.url,
        prefix,
        asset: ASSET,
        stateDir,
        mode: 'add',
        count: 10,
        waitForGo: true,
      });
      await a.waitFor((l) => l.connected === true, 60_000, 'connection');
      proxy.holdReplies = true; // from now on no PUBACK reaches the agent
      a.proc.stdin!.write('go\n');
      await a.waitFor((l) => l.all_durable === true, 60_000, 'all events durable');
      // The child keeps at most 4 unacknowledged events in flight (inflight_window: 4): those
      // 4 reach the broker, the other 6 wait on disk.
      await sub.waitFor(
        (m) => m.filter((x) => x.topic.includes('/event/')).length >= 4,
        10_000,
        'the first four events at the broker',
      );
      await new Promise((r) => setTimeout(r, 300));
      expect(sub.messages.filter((x) => x.topic.includes('/event/'))).toHaveLength(4);
      // published or not, none acknowledged: all still on disk
      expect(recs(stateDir)).toHaveLength(10);
      await killHard(a);
      await sub.waitFor(
        (m) =>
          m.some(
            (x) => x.topic === `${base}/status` && (x.json as { online: boolean }).online === false,
          ),
        5000,
        'last-will',
      );
      const will = sub.messages.filter((x) => x.topic === `${base}/status`).at(-1)!;
      expect(will.json).toMatchObject({ online: false, reason: 'connection lost' });
      assertMatches('status.v1', will.json);

      const firstCopies = sub.messages
        .filter((x) => x.topic.includes('/event/'))
        .map((x) => x.payload.toString());
      const b = startChild({ url: broker.url, prefix, asset: ASSET, stateDir, mode: 'drain' });
      await b.waitFor((l) => 'drained' in l, 60_000, 'drain');
      expect(await b.exited).toBe(0);
      await sub.waitFor(
        (m) => m.filter((x) => x.topic.includes('/event/')).length >= 14,
        5000,
        'all ten events after the restart',
      );
      const all = sub.messages.filter((x) => x.topic.includes('/event/'));
      const afterRestart = all.slice(4).map((x) => x.payload.toString());
      expect(afterRestart.map((p) => (JSON.parse(p) as { id: string }).id)).toEqual(
        Array.from({ length: 10 }, (_, i) => `ev-${String(i).padStart(5, '0')}`),
      );
      // The four delivered before the kill come again unchanged: same bytes, so the same id.
      expect(afterRestart.slice(0, 4)).toEqual(firstCopies);
      expect(recs(stateDir)).toEqual([]);
    },
    SLOW,
  );

  it(
    'random kill -9 while saving and publishing: every event reported saved is delivered at least once',
    async () => {
      const { broker, prefix, sub, stateDir } = await scene();
      const durable = new Set<string>();
      const ROUNDS = 5;
      for (let round = 0; round < ROUNDS; round++) {
        const c = startChild({
          url: broker.url,
          prefix,
          asset: ASSET,
          stateDir,
          mode: 'loop',
          idPrefix: `r${round}`,
        });
        await c.waitFor((l) => typeof l.durable === 'string', 60_000, 'a first saved event');
        await new Promise((r) => setTimeout(r, 50 + Math.random() * 400));
        await killHard(c);
        for (const l of c.lines) if (typeof l.durable === 'string') durable.add(l.durable);
      }
      const last = startChild({ url: broker.url, prefix, asset: ASSET, stateDir, mode: 'drain' });
      await last.waitFor((l) => 'drained' in l, 60_000, 'drain');
      expect(await last.exited).toBe(0);
      const received = () => new Set(sub.messages.map((m) => (m.json as { id: string }).id));
      await sub.waitFor(
        () => [...durable].every((id) => received().has(id)),
        10_000,
        'every saved event',
      );
      const missing = [...durable].filter((id) => !received().has(id));
      expect(missing).toEqual([]);
      expect(durable.size).toBeGreaterThan(ROUNDS);
      // Within each run, first arrivals keep the order the events were added in.
      for (let round = 0; round < ROUNDS; round++) {
        const firsts = [
          ...new Set(
            sub.messages
              .map((m) => (m.json as { id: string }).id)
              .filter((id) => id.startsWith(`r${round}-`)),
          ),
        ];
        expect(firsts).toEqual([...firsts].sort());
      }
      // A kill during a save may leave a torn temporary file: it is quarantined, never loaded.
      const quarantined = readdirSync(join(stateDir, 'outbox', 'quarantine'));
      for (const q of quarantined) expect(q).toMatch(/\.rec\.tmp\./);
      expect(recs(stateDir)).toEqual([]);
      console.info(
        `random kill -9: ${ROUNDS} rounds, ${durable.size} events reported ` +
          `saved, ${sub.messages.length} messages received (duplicates ` +
          `allowed), ${quarantined.length} torn temp file(s) quarantined`,
      );
    },
    SLOW,
  );
});
