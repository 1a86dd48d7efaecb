import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Browser } from 'playwright-core';
import { fastPacer, launchChromium } from './support/browser.js';
import { afterAll, describe, expect, it } from 'vitest';
import { systemClock } from '../agent/clock.js';
import { MemoryLogger } from '../agent/log.js';
import { assemble } from '../agent/runtime/assemble.js';
import { SimSource, type Pacer } from '../drivers/sim/source.js';
import { plan } from './sim-fixtures.js';
import { agentConfig, FS, scenario, velocityPeakRpm } from './support/sweep-sim.js';

/**
 * Sweeps and captures on the live page and its HTTP API, the whole agent (assemble) on the
 * simulated fan of test/support/sweep-sim.ts, paced 6 times faster than real time so the page sees
 * the run-up happen; Debian chromium through playwright-core at 390 px wide (a phone).
 * Set TURNWISE_SCREENSHOT_DIR to keep the screenshots.
 */
const VIEWER = 'viewer-0123456789abcdef-sweeps';
describe('sweeps and captures on the live page', () => {
  let browser: Browser | undefined;
  afterAll(async () => {
    await browser?.close();
  });

  it('lists and downloads captures and sweeps over HTTP with the token, and draws the run-up live at 390 px', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tw-live-sweeps-'));
    const shots = process.env.TURNWISE_SCREENSHOT_DIR ?? dir;
    const cfg = agentConfig(
      join(dir, 'state'),
      undefined,
      {},
      {
        live: {
          port: 0,
          tokens: [{ name: 'control-room', role: 'viewer', env: 'TW_SWEEP_VIEWER' }],
          update_hz: 4,
        },
        capture: { enabled: true, pre_s: 1, post_s: 1 },
      },
    );
    const log = new MemoryLogger();
    const sc = scenario(15);
    // Run-up over 40 s, 10 s steady, coast-down over 40 s.
    const tl = [
      { at: 1, start: { rpm: 1500, ramp_s: 40 } },
      { at: 51, stop: { coast_s: 40 } },
    ];
    const src = new SimSource(plan({ ...sc, timeline: tl }, cfg), {
      blockSamples: 1024,
      pace: 'realtime',
      pacer: fastPacer(6),
      totalSamples: 100 * FS,
    });
    const asm = await assemble({
      config: cfg,
      clock: systemClock,
      logger: log,
      env: { TW_SWEEP_VIEWER: VIEWER },
      openGpio: () => undefined,
      openSource: () => ({ source: src, boardTimesTach: false }),
      startMs: Date.UTC(2026, 11, 3, 6),
    });
    const url = (await asm.startLive())!;
    const running = asm.agent.run(1000);
    try {
      browser = await launchChromium();
      const page = await browser.newPage({
        viewport: { width: 390, height: 844 },
        deviceScaleFactor: 2,
      });
      const errors: string[] = [];
      page.on('pageerror', (e) => errors.push(String(e)));
      await page.goto(url + '#sweeps');
      await page.waitForSelector('#login:not([hidden])');
      await page.fill('#token', VIEWER);
      await page.click('#login-form button');
      await page.waitForSelector('#view-sweeps:not([hidden])');
      // Live: the run-up grows on the plots while it happens.
      await page.waitForFunction(
        () =>
          /Run-up going on: \d+ points/.test(
            (globalThis as any).document.getElementById('sweep-status').textContent,
          ),
        undefined,
        { timeout: 30_000 },
      );
      const n1 = Number((await page.textContent('#sweep-status'))!.match(/(\d+) points/)![1]);
      await page.waitForTimeout(2000);
      const n2 = Number((await page.textContent('#sweep-status'))!.match(/(\d+) points/)?.[1] ?? 0);
      expect(n2).toBeGreaterThan(n1);
      expect(await page.locator('#bode .bode-plot canvas').count()).toBe(2);
      await page.screenshot({ path: join(shots, 'sweeps-live-phone.png'), fullPage: true });

      // A capture on command, for the download.
      const cap = asm.agent.handlers.takeCapture!({} as never) as { capture_id: string };
      // Both sweeps recorded (run-up, coast-down) and the capture written.
      const auth = { Authorization: `Bearer ${VIEWER}` };
      const get = (p: string, h: Record<string, string> = auth) =>
        fetch(url + p.slice(1), { headers: h });
      const until = Date.now() + 60_000;
      let sweeps: {
        id: string;
        direction: string;
        reference: boolean;
        resonances: { sensor: string; rpm: number }[];
      }[] = [];
      while (Date.now() < until) {
        sweeps = ((await (await get('/api/sweeps')).json()) as { sweeps: typeof sweeps }).sweeps;
        if (sweeps.length >= 2) break;
        await new Promise((r) => setTimeout(r, 500));
      }
      expect(sweeps.map((s) => s.direction)).toEqual(['down', 'up']); // newest first
      // the model's own curve (own computation), test/support/sweep-sim.ts
      const want = velocityPeakRpm(15, 0.06);
      for (const s of sweeps)
        for (const r of s.resonances) expect(Math.abs(r.rpm - want) / want).toBeLessThan(0.03);
      const one = (await (await get(`/api/sweeps/${sweeps[0]!.id}`)).json()) as {
        channels: { points: unknown[] }[];
      };
      expect(one.channels).toHaveLength(6);
      expect(one.channels[0]!.points.length).toBeGreaterThan(20);

      // Captures: token needed, ids checked, files as on disk.
      expect((await get('/api/captures', {})).status).toBe(401);
      const caps = ((await (await get('/api/captures')).json()) as { captures: { id: string }[] })
        .captures;
      expect(caps.map((c) => c.id)).toContain(cap.capture_id);
      const wav = await get(`/api/captures/${cap.capture_id}/wav`);
      expect(wav.status).toBe(200);
      expect(wav.headers.get('content-disposition')).toBe(
        `attachment; filename="${cap.capture_id}.wav"`,
      );
      const bytes = Buffer.from(await wav.arrayBuffer());
      expect(
        bytes.equals(readFileSync(join(cfg.state_dir, 'captures', `${cap.capture_id}.wav`))),
      ).toBe(true);
      expect(bytes.subarray(0, 4).toString()).toBe('RIFF');
      expect(await (await get(`/api/captures/${cap.capture_id}/yaml`)).text()).toMatch(
        /acquisition:\n\s+driver: wav/,
      );
      for (const bad of [
        `/api/captures/${cap.capture_id}/exe`,
        '/api/captures/..%2F..%2Fconfig/json',
        '/api/captures/../state.json',
        '/api/captures/20261203T000000Z-99/wav',
        '/api/sweeps/..%2Fsweeps',
        '/api/sweeps/20991231T000000Z-up',
      ]) {
        const r = await get(bad);
        expect(r.status, bad).toBe(404);
      }

      // The page: the recorded sweeps listed and overlaid, the captures downloadable; nothing wider
      // than the phone.
      await page.evaluate(() => void ((globalThis as any).location.hash = '#live'));
      await page.evaluate(() => void ((globalThis as any).location.hash = '#sweeps'));
      await page.waitForFunction(
        () => (globalThis as any).document.querySelectorAll('#sweep-list li').length >= 2,
        undefined,
        { timeout: 20_000 },
      );
      await page.waitForSelector(`#capture-list li[data-capture="${cap.capture_id}"]`);
      const width = await page.evaluate(
        () => (globalThis as any).document.documentElement.scrollWidth as number,
      );
      expect(width).toBeLessThanOrEqual(390);
      const [download] = await Promise.all([
        page.waitForEvent('download'),
        page.click(`#capture-list li[data-capture="${cap.capture_id}"] button[data-ext="json"]`),
      ]);
      expect(download.suggestedFilename()).toBe(`${cap.capture_id}.json`);
      // The polar plot drew something: pixels that are not blank.
      const inked = await page.evaluate(() => {
        const c = (globalThis as any).document.getElementById('sweep-polar');
        const d = c.getContext('2d').getImageData(0, 0, c.width, c.height)
          .data as Uint8ClampedArray;
        let n = 0;
        for (let i = 3; i < d.length; i += 4) if (d[i]! > 0) n++;
        return n;
      });
      expect(inked).toBeGreaterThan(1000);
      await page.screenshot({ path: join(shots, 'sweeps-phone.png'), fullPage: true });
      expect(errors).toEqual([]);
    } finally {
      asm.agent.stop();
      await running.catch(() => undefined);
      await asm.stopLive();
      if (!process.env.TURNWISE_SCREENSHOT_DIR) rmSync(dir, { recursive: true, force: true });
    }
  }, 180_000);
});

describe('balancing near a resonance', () => {
  it("the workbench warns that influence coefficients at a speed inside the last sweep's resonance band are unreliable", async () => {
    const { LiveServer } = await import('../agent/live/server.js');
    const OPERATOR = 'operator-0123456789abcdef-sweeps';
    const dir = mkdtempSync(join(tmpdir(), 'tw-wb-resonance-'));
    const cfg = agentConfig(
      join(dir, 'state'),
      undefined,
      {},
      { live: { port: 0, tokens: [{ name: 'crew', role: 'operator', env: 'TW_WB_OP' }] } },
    );
    let band: [number, number] = [1440, 1530];
    const server = LiveServer.fromConfig(
      cfg,
      {
        logger: new MemoryLogger(),
        clock: systemClock,
        emit: () => undefined,
        sweepEvidence: () => ({
          sweep_id: '20261203T060007Z-up',
          direction: 'up',
          resonances: [{ sensor: 'DE-H', rpm: 1485, half_power_rpm: band }],
        }),
      },
      { TW_WB_OP: OPERATOR },
    );
    const url = (await server.start()).url;
    try {
      const post = async (path: string, body: unknown) =>
        (
          await fetch(url + path.slice(1), {
            method: 'POST',
            headers: { Authorization: `Bearer ${OPERATOR}`, 'Content-Type': 'application/json' },
            body: JSON.stringify(body),
          })
        ).json() as Promise<{ view: { resonance_warning: string | null } }>;
      const get = async (path: string) =>
        (
          await fetch(url + path.slice(1), { headers: { Authorization: `Bearer ${OPERATOR}` } })
        ).json() as Promise<{ view: { resonance_warning: string | null } }>;
      const v = await post('/api/jobs', {
        kind: 'single_plane',
        by: 'A. Ruiz (invented)',
        speed_rpm: 1500,
        planes: [{ name: 'P1', radius_mm: 760 }],
      });
      expect(v.view, JSON.stringify(v)).toBeDefined();
      expect(v.view.resonance_warning).toMatch(
        /1500 r\/min is inside the band .*\(sweep 20261203T060007Z-up\).*1485 r\/min on DE-H \(half-power band 1440-1530\)\. Influence coefficients measured here are unreliable/,
      );
      band = [860, 960];
      expect((await get('/api/jobs/open')).view.resonance_warning).toBeNull();
    } finally {
      await server.stop();
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
