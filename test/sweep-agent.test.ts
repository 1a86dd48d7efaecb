import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { ManualClock } from '../agent/clock.js';
import { MemoryLogger } from '../agent/log.js';
import { Agent } from '../agent/runtime/agent.js';
import { compareSweeps } from '../agent/sweep/recorder.js';
import type { StoredSweep } from '../agent/sweep/store.js';
import { SimSource } from '../drivers/sim/source.js';
import { plan } from './sim-fixtures.js';
import { agentConfig, FS, scenario, velocityPeakRpm } from './support/sweep-sim.js';
import { plainBroker } from './support/mosquitto.js';
import { assertMatches } from './support/payload-schemas.js';
import { TestSubscriber } from './support/subscriber.js';
import { fillUp, tryMountTmpfs, unmountTmpfs } from './support/tmpfs.js';

/**
 * `turnwise run` records run-ups and coast-downs: the simulator (drivers/sim) starts the fan, runs
 * it, coasts it down, then (after its horizontal supports were softened) starts it again; the agent
 * publishes `sweep_recorded` over a real mosquitto and compares the second run-up with the first.
 *
 * Expected values: the simulator's support model is the steady-state single-degree-of-freedom
 * receptance at the present speed (drivers/sim/physics.ts), driven by the unbalance force
 * m r w^2; the 1x velocity is then proportional to w^3 |G(w)|. Its peak speed is found here on a
 * fine grid (own computation): horizontal natural frequency 15 Hz, damping 0.06 -> about 909 r/min;
 * softened to 13.5 Hz -> 10 % lower. The vertical (45 Hz) and axial supports resonate far above
 * the speed range: no resonance there.
 */
describe('sweeps recorded by the agent', () => {
  let broker: { url: string; dispose(): Promise<void> };
  beforeAll(async () => {
    broker = await plainBroker();
  });
  afterAll(async () => {
    await broker?.dispose();
  });

  it('publishes sweep_recorded for the simulator run-up and coast-down with the horizontal resonance, stores them, and warns when it moved', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-sweep-agent-'));
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const cfg = agentConfig(join(dir, 'state'), { url: broker.url, topic_prefix: prefix });
    const sub = await TestSubscriber.open(broker.url, [`${prefix}/#`]);
    const t0 = Date.UTC(2026, 11, 3, 6, 0, 0);
    const seconds = 240;
    const src = new SimSource(plan(scenario(15, { fnH: 13.5 }), cfg), {
      blockSamples: 1024,
      pace: 'fast',
      totalSamples: seconds * FS,
    });
    const log = new MemoryLogger();
    const agent = new Agent({
      config: cfg,
      source: src,
      boardTimesTach: false,
      clock: new ManualClock(t0),
      logger: log,
      startMs: t0,
    });
    const sum = await agent.run(10_000);
    expect(sum.drained).toBe(true);
    const base = `${prefix}/kessrow-id3a/event`;
    await sub.waitFor(
      (m) => m.filter((x) => x.topic === `${base}/sweep_recorded`).length >= 3,
      10_000,
      'three sweep_recorded',
    );
    await sub.waitFor(
      (m) => m.some((x) => x.topic === `${base}/resonance_moved`),
      10_000,
      'resonance_moved',
    );
    const recorded = sub.on(`${base}/sweep_recorded`).map(
      (m) =>
        m.json as Record<string, unknown> & {
          resonances: {
            sensor: string;
            rpm: number;
            amplification_factor: number;
            phase_shift_deg: number;
          }[];
        },
    );
    for (const m of sub.messages.filter((x) => x.topic.startsWith(`${base}/`)))
      assertMatches('event.v1', m.json);
    expect(recorded.map((e) => e.direction)).toEqual(['up', 'down', 'up']);
    const want1 = velocityPeakRpm(15, 0.06);
    const want2 = velocityPeakRpm(13.5, 0.06);
    expect(want1).toBeGreaterThan(900);
    expect(want1).toBeLessThan(915);
    const found: string[] = [];
    recorded.forEach((e, k) => {
      const want = k < 2 ? want1 : want2;
      const sensors = e.resonances.map((r) => r.sensor).sort();
      expect(sensors).toEqual(['DE-H', 'NDE-H']);
      for (const r of e.resonances) {
        found.push(
          `${e.direction} ${r.sensor} ${r.rpm} r/min (want ${want.toFixed(1)}) ` +
            `AF ${r.amplification_factor} shift ${r.phase_shift_deg}`,
        );
        expect(Math.abs(r.rpm - want) / want).toBeLessThan(0.03);
        // AF about 1 / (2 zeta) = 8.3 for a lightly damped mode (textbook); the curve from
        // 4-revolution points is coarser.
        expect(r.amplification_factor).toBeGreaterThan(5);
        expect(r.amplification_factor).toBeLessThan(12);
        expect(Math.abs(r.phase_shift_deg)).toBeGreaterThan(45);
      }
    });
    console.log(found.join('\n'));
    // The first sweep of each direction became its reference; the second run-up was compared with
    // the first.
    expect(recorded[0]!.reference).toBe(true);
    expect(recorded[1]!.reference).toBe(true);
    expect(recorded[2]!.reference).toBe(false);
    expect(recorded[2]!.compared_with).toBe(recorded[0]!.sweep_id);
    const moved = sub
      .on(`${base}/resonance_moved`)
      .map(
        (m) =>
          m.json as { sensor: string; severity: string; moved_pct: number; reference_id: string },
      );
    expect(moved.map((m) => m.sensor).sort()).toEqual(['DE-H', 'NDE-H']);
    for (const m of moved) {
      expect(m.severity).toBe('warning');
      // 13.5 / 15 - 1 = -10 % (the model's own shift), more than the 5 % default.
      expect(m.moved_pct).toBeLessThan(-7);
      expect(m.moved_pct).toBeGreaterThan(-13);
      expect(m.reference_id).toBe(recorded[0]!.sweep_id);
    }
    // Far from running speed (1500 r/min): no near-running warning.
    expect(sub.on(`${base}/resonance_near_running_speed`)).toHaveLength(0);
    // On disk, the same as turnwise sweep --json prints per sweep, with id and reference.
    const files = readdirSync(join(cfg.state_dir, 'sweeps')).sort();
    expect(files).toEqual(recorded.map((e) => `${e.sweep_id as string}.json`).sort());
    const first = JSON.parse(
      readFileSync(join(cfg.state_dir, 'sweeps', files[0]!), 'utf8'),
    ) as StoredSweep;
    expect(first.channels).toHaveLength(6);
    expect(first.channels[0]!.points.length).toBeGreaterThan(50);
    expect(agent.health().sweeps_recorded).toBe(3);
    await sub.close();
    rmSync(dir, { recursive: true, force: true });
  }, 120_000);

  it('compares: a moved resonance, and a new one within the margin of running speed, are findings; the reference itself is none', () => {
    const ch = (id: string, res: { rpm: number; margin_ok: boolean }[]) => ({
      id,
      resonances: res.map((r) => ({
        ...r,
        separation_margin_pct: (100 * Math.abs(1500 - r.rpm)) / 1500,
        required_margin_pct: 14,
      })),
    });
    const ref = {
      channels: [ch('DE-H', [{ rpm: 900, margin_ok: true }])],
    } as unknown as StoredSweep;
    expect(compareSweeps(ref, ref, 0.05)).toEqual([]);
    const cur = {
      channels: [
        ch('DE-H', [
          { rpm: 930, margin_ok: true },
          { rpm: 1400, margin_ok: false },
        ]),
      ],
    } as unknown as StoredSweep;
    const f = compareSweeps(cur, ref, 0.05);
    // 930 is 3.3 % from 900: within 5 %; 1400 is new and 6.7 % from running speed, inside 14 %.
    expect(f.map((x) => x.kind)).toEqual(['near_running']);
    expect(compareSweeps(cur, ref, 0.02).map((x) => `${x.kind} ${x.rpm}`)).toEqual([
      'moved 930',
      'near_running 1400',
    ]);
  });

  it('keeps the newest sweeps within max_count, never the reference; a full disk logs once and monitoring goes on', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-sweep-bounds-'));
    // Five run-up/coast-down cycles of 20 s each way.
    const sc = scenario(15);
    const tl: unknown[] = [];
    for (let k = 0; k < 3; k++)
      tl.push(
        { at: 1 + 50 * k, start: { rpm: 1500, ramp_s: 20 } },
        { at: 26 + 50 * k, stop: { coast_s: 20 } },
      );
    const run = async (stateDir: string, seconds: number) => {
      const cfg = agentConfig(stateDir, undefined, { max_count: 2 });
      const log = new MemoryLogger();
      const agent = new Agent({
        config: cfg,
        source: new SimSource(plan({ ...sc, timeline: tl }, cfg), {
          blockSamples: 1024,
          pace: 'fast',
          totalSamples: seconds * FS,
        }),
        boardTimesTach: false,
        clock: new ManualClock(0),
        logger: log,
        startMs: Date.UTC(2026, 11, 3),
      });
      const sum = await agent.run(1000);
      return { agent, log, sum, cfg };
    };
    const a = await run(join(dir, 'state'), 150);
    const h = a.agent.health();
    expect(h.sweeps_recorded).toBe(6);
    const files = readdirSync(join(a.cfg.state_dir, 'sweeps')).sort();
    const stored = files.map(
      (f) => JSON.parse(readFileSync(join(a.cfg.state_dir, 'sweeps', f), 'utf8')) as StoredSweep,
    );
    // The two references (first up, first down) plus the two newest others.
    expect(
      stored
        .filter((s) => s.reference)
        .map((s) => s.direction)
        .sort(),
    ).toEqual(['down', 'up']);
    expect(stored.filter((s) => !s.reference)).toHaveLength(2);
    expect(h.sweeps_removed).toBe(2);
    rmSync(dir, { recursive: true, force: true });
    const mnt = tryMountTmpfs();
    if (!mnt) {
      console.log('full-disk part skipped: no tmpfs mount allowed here');
      return;
    }
    try {
      fillUp(mnt);
      const b = await run(join(mnt, 'state'), 150);
      expect(b.sum.windows).toBe(75);
      expect(b.agent.health().sweeps_failed).toBe(6);
      const lines = b.log.lines.filter((e) => /sweep .* could not be written/.test(e.msg));
      expect(lines).toHaveLength(1);
    } finally {
      unmountTmpfs(mnt);
    }
  }, 120_000);
});

describe('the last sweep as evidence for the watcher', () => {
  it('running speed inside a resonance half-power band adds resonance to the 1x causes, with the sweep as its reason; outside it changes nothing', async () => {
    const { openWatcher } = await import('../agent/watcher/watcher.js');
    const { FakeClock } = await import('./support/fake-clock.js');
    const { demoConfig, fanCase, synthWindow } = await import('./support/fan-windows.js');
    const verdict = (band: [number, number] | null) => {
      const dir = mkdtempSync(join(tmpdir(), 'tw-sweep-evidence-'));
      const w = openWatcher(
        demoConfig({ state_dir: dir, watcher: { window_s: 10 } }),
        new FakeClock(Date.parse('2031-03-02T08:00:00Z')),
      );
      if (band)
        w.setSweepEvidence({
          sweep_id: '20310302T070000Z-up',
          direction: 'up',
          resonances: [{ sensor: 'DE-H', rpm: (band[0] + band[1]) / 2, half_power_rpm: band }],
        });
      let last = null as ReturnType<typeof w.process> | null;
      for (let i = 0; i < 3; i++)
        last = w.process(
          synthWindow({ ...fanCase('static', { speed_rpm: 1485 }), start_index: i * 51200 }),
        );
      return last!.status.latest!.unbalance;
    };
    const plain = verdict(null);
    expect(plain.kind).toBe('static');
    // Running speed 1485 r/min inside 1440-1530: the 1x is not read as unbalance alone.
    const inside = verdict([1440, 1530]);
    expect(inside.kind).toBe('none');
    const res = inside.points_to.find((p) => p.cause === 'resonance');
    expect(res?.why).toMatch(
      /inside the half-power band 1440-1530 r\/min .* \(sweep 20310302T070000Z-up\)/,
    );
    // A band below running speed: the verdict is the plain one.
    const outside = verdict([860, 960]);
    expect(outside.kind).toBe('static');
    expect(outside.points_to).toEqual([]);
  });
});
