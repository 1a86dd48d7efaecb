import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { createSource } from '../drivers/create-source.js';
import { systemClock } from '../agent/clock.js';
import { loadConfig, validateConfig } from '../agent/config/load.js';
import type { AgentEvent } from '../agent/events.js';
import { MemoryLogger } from '../agent/log.js';
import { assemble, type Assembly } from '../agent/runtime/assemble.js';

/**
 * The one assembly used by `turnwise run` and `turnwise demo`: the agent and the live page built
 * from a config, with their links. The simulated demo fan (invented Kessrow ID-3A, day 5 15:00) is
 * played as fast as it is taken; the agent is stopped after three windows. Every link is checked at
 * the page's own API: windows reach the trend, the watcher's status the zones, live 1x vectors the
 * polar plots, a balancing job started by the MQTT command reaches the workbench, and the
 * workbench's event comes back through the agent's event queue.
 */

const OPERATOR = 'operator-assemble-0123456789abcdef';
const dirs: string[] = [];

function config(withLive: boolean) {
  const dir = mkdtempSync(join(tmpdir(), 'tw-assemble-'));
  dirs.push(dir);
  return validateConfig({
    ...loadConfig('config/example.yaml'),
    acquisition: {
      driver: 'sim',
      scenario: 'example-scenario.yaml',
      pace: 'fast',
      from_day: 5.625,
    },
    state_dir: dir,
    ...(withLive
      ? {
          live: {
            port: 0,
            tokens: [{ name: 'balancing-crew', role: 'operator', env: 'TW_ASSEMBLE_OPERATOR' }],
          },
        }
      : {}),
  });
}

async function runFor(asm: Assembly, windows: { n: number }, stopAfter: number): Promise<void> {
  const timer = setInterval(() => {
    if (windows.n >= stopAfter) asm.agent.stop();
  }, 20);
  try {
    await asm.agent.run(0);
  } finally {
    clearInterval(timer);
  }
}

afterAll(() => {
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

describe('assemble: the agent, the live page and their links', () => {
  it('links windows, watcher status, live vectors, the balancing command and workbench events', async () => {
    const cfg = config(true);
    const events: AgentEvent[] = [];
    const windows = { n: 0 };
    const log = new MemoryLogger();
    const asm = await assemble({
      config: cfg,
      clock: systemClock,
      logger: log,
      env: { TW_ASSEMBLE_OPERATOR: OPERATOR },
      openGpio: () => undefined,
      openSource: (c) => createSource(c, 'config/example.yaml', { log }),
      onWindow: () => void windows.n++,
      onEvent: (e) => void events.push(e),
    });
    expect(asm.live).not.toBeNull();
    const url = await asm.startLive();
    expect(url).toMatch(/^http:\/\/127\.0\.0\.1:\d+\/$/);
    try {
      await runFor(asm, windows, 3);
      const get = async (path: string) =>
        (
          await fetch(url + path.slice(1), { headers: { Authorization: `Bearer ${OPERATOR}` } })
        ).json() as Promise<any>;
      const trend = await get('/api/trend');
      // Every window the agent closed reached the page's trend.
      expect(windows.n).toBeGreaterThanOrEqual(3);
      expect(trend.points.length).toBe(windows.n);
      const live = await get('/api/live');
      expect(live.channels.length).toBe(cfg.sensors.length);
      for (const ch of live.channels) {
        expect(ch.one_x).not.toBeNull(); // live frames reached the page
        expect(ch.overall_rms_mm_s).toBeGreaterThan(0); // windows reached it
        expect(ch.ok).not.toBeNull(); // the watcher's status reached it
      }
      expect(live.machine_zone).toMatch(/^[A-D]$/);

      // The plant's balancing.session command goes to the page's workbench ...
      const handler = asm.agent.handlers.balancingSession;
      expect(handler).toBeDefined();
      expect(await handler!({ action: 'status' })).toEqual({ job_id: null, status: 'none' });
      const started = await handler!({
        action: 'start',
        params: {
          kind: 'single_plane',
          by: 'A. Tester (invented)',
          planes: [{ name: 'P1', radius_mm: 600 }],
        },
      });
      expect(started['status']).toBe('open');
      const open = await get('/api/jobs/open');
      expect(open.view.job.job_id).toBe(started['job_id']);
      // ... and the workbench's event comes back through the agent's queue.
      const ev = events.find((e) => e.type === 'balancing_job_started');
      expect(ev?.['job_id']).toBe(started['job_id']);
    } finally {
      await asm.stopLive();
    }
  }, 120_000);

  it('builds no page and no balancing command without a live section', async () => {
    const windows = { n: 0 };
    const log = new MemoryLogger();
    const asm = await assemble({
      config: config(false),
      clock: systemClock,
      logger: log,
      openGpio: () => undefined,
      openSource: (c) => createSource(c, 'config/example.yaml', { log }),
      onWindow: () => void windows.n++,
    });
    expect(asm.live).toBeNull();
    expect(await asm.startLive()).toBeNull();
    await runFor(asm, windows, 1);
    expect(windows.n).toBeGreaterThanOrEqual(1);
    expect(asm.agent.handlers.balancingSession).toBeUndefined();
    await asm.stopLive();
  }, 120_000);
});
