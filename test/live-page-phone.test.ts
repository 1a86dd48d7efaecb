import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { fastPacer, launchChromium } from './support/browser.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { systemClock } from '../agent/clock.js';
import { loadConfig, validateConfig } from '../agent/config/load.js';
import { LiveServer } from '../agent/live/server.js';
import { MemoryLogger } from '../agent/log.js';
import { AgentRuntime } from '../agent/runtime/runtime.js';
import { openWatcher } from '../agent/watcher/index.js';
import { loadScenario, resolveScenario } from '../drivers/sim/scenario.js';
import { SimSource, type Pacer } from '../drivers/sim/source.js';

/**
 * The live page on a phone, in a real browser (Debian chromium through playwright-core): every
 * screen (token, vectors, balancing with an open job and its tools, job records, report) at 390 x
 * 844 CSS px (a common phone width) and after turning the phone to 844 x 390, with no sideways
 * scrolling: document.documentElement.scrollWidth <= window.innerWidth, and the trend charts no
 * wider than the screen and as wide as it allows (they follow the page through a ResizeObserver).
 * The simulated demo fan (invented Kessrow ID-3A, day 5 15:00) runs 8 times faster than real time.
 *
 * Set TURNWISE_SCREENSHOT_DIR to keep the screenshots (docs/live-view-phone.png is one).
 */

const OPERATOR = 'operator-phone-0123456789abcdef';
const SPEED_UP = 8;
const PHONE = { width: 390, height: 844 };
const TURNED = { width: 844, height: 390 };
interface Fit {
  readonly innerWidth: number;
  readonly scrollWidth: number;
  /** Elements reaching past the right edge (outside a box that scrolls itself), for the message. */
  readonly over: readonly string[];
  /** Widths of the trend chart canvases, CSS px. */
  readonly charts: readonly number[];
}

/** Measured in the page (a string, so the project compiles without the DOM library). */
const MEASURE = `(() => {
  const vw = window.innerWidth;
  const over = [...document.querySelectorAll('body *')]
    .filter((e) => { const r = e.getBoundingClientRect(); return r.width > 0 && r.right > vw + 0.5 && !e.parentElement.closest('.scroll'); })
    .slice(0, 6)
    .map((e) => e.tagName.toLowerCase() + (e.id ? '#' + e.id : '') + (typeof e.className === 'string' && e.className ? '.' + e.className.split(' ').join('.') : '') + ' right ' + Math.round(e.getBoundingClientRect().right));
  const charts = [...document.querySelectorAll('#trend canvas')].map((c) => c.getBoundingClientRect().width);
  return { innerWidth: vw, scrollWidth: document.documentElement.scrollWidth, over, charts };
})()`;

describe('the live page on a phone (390 px wide, and turned)', () => {
  let dir: string;
  let shots: string;
  let rt: AgentRuntime;
  let running: Promise<unknown>;
  let server: LiveServer;
  let browser: Browser;
  let page: Page;
  let url: string;
  let jobId: string;
  const pageErrors: string[] = [];

  const fits = async (screen: string): Promise<Fit> => {
    const f = (await page.evaluate(MEASURE)) as Fit;
    // With the screenshots kept (documentation runs), the measured widths are written out too.
    if (process.env.TURNWISE_SCREENSHOT_DIR) {
      process.stderr.write(
        `phone: ${screen} at ${f.innerWidth} px: page ` +
          `${f.scrollWidth} px, charts ${f.charts.join(', ') || 'none'} px\n`,
      );
    }
    // The message names the screen and what sticks out, so a failure says where to look.
    expect(
      f.scrollWidth,
      `${screen} at ${f.innerWidth} px: page ${f.scrollWidth} px ` +
        `wide; past the edge: ${f.over.join(', ')}`,
    ).toBeLessThanOrEqual(f.innerWidth);
    expect(f.over, `${screen} at ${f.innerWidth} px`).toEqual([]);
    return f;
  };
  const show = async (hash: string, selector: string) => {
    await page.evaluate(`location.hash = '${hash}'`);
    await page.waitForSelector(selector, { timeout: 20_000 });
    await page.waitForTimeout(300); // a ResizeObserver callback and a redraw
  };

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'tw-live-phone-'));
    shots = process.env.TURNWISE_SCREENSHOT_DIR ?? dir;
    const cfg = validateConfig({
      ...loadConfig('config/example.yaml'),
      state_dir: dir,
      live: {
        port: 0,
        tokens: [{ name: 'balancing-crew', role: 'operator', env: 'TW_PHONE_OPERATOR' }],
        update_hz: 4,
      },
    });
    const plan = resolveScenario(loadScenario('config/example-scenario.yaml'), cfg);
    const src = new SimSource(plan, {
      startS: 5.625 * 86400,
      blockSamples: 2560,
      pace: 'realtime',
      pacer: fastPacer(SPEED_UP),
    });
    const logger = new MemoryLogger();
    const watcher = openWatcher(cfg);
    server = LiveServer.fromConfig(
      cfg,
      { logger, clock: systemClock, emit: () => undefined },
      { TW_PHONE_OPERATOR: OPERATOR },
    );
    url = (await server.start()).url;
    rt = new AgentRuntime({
      config: cfg,
      source: src,
      clock: systemClock,
      logger,
      windowSeconds: 4,
      liveSeconds: 0.5,
      windowConsumers: [server, { onWindow: (w) => server.onWatch(watcher.process(w).status) }],
      liveConsumers: [server],
    });
    running = rt.run();
    browser = await launchChromium();
    page = await browser.newPage({ viewport: PHONE, deviceScaleFactor: 1 });
    page.on('pageerror', (e) => pageErrors.push(String(e)));
    page.on('console', (m) => m.type() === 'error' && pageErrors.push(m.text()));
  });

  afterAll(async () => {
    await browser?.close();
    rt?.stop();
    await running?.catch(() => undefined);
    await server?.stop();
    if (!process.env.TURNWISE_SCREENSHOT_DIR) rmSync(dir, { recursive: true, force: true });
  });

  it('token screen and vectors with the trend: no sideways scrolling, charts within the screen, upright and turned', async () => {
    await page.goto(url);
    await page.waitForSelector('#login:not([hidden])');
    await fits('token screen');
    await page.fill('#token', OPERATOR);
    await page.click('#login-form button');
    await page.waitForSelector('#view-live:not([hidden]) .card[data-at-ms]:not([data-at-ms=""])', {
      timeout: 30_000,
    });
    await page.waitForFunction('document.querySelectorAll("#trend canvas").length >= 2');
    await page.waitForSelector('.card[data-sensor="DE-V"] .okbadge.ok-yes', { timeout: 20_000 });
    await page.waitForTimeout(2500); // a few trend points
    const upright = await fits('vectors');
    expect(upright.charts.length).toBeGreaterThanOrEqual(2);
    for (const w of upright.charts) {
      expect(w).toBeLessThanOrEqual(PHONE.width);
      // as wide as the screen allows, not a fixed width
      expect(w).toBeGreaterThan(PHONE.width * 0.8);
    }
    await page.screenshot({ path: join(shots, 'live-view-phone.png') });
    await page.evaluate(`document.querySelector('#trend').previousElementSibling.scrollIntoView()`);
    await page.screenshot({ path: join(shots, 'live-trend-phone.png') });

    await page.setViewportSize(TURNED);
    await page.waitForTimeout(500);
    const turned = await fits('vectors, turned');
    await page.evaluate(`document.querySelector('#trend').previousElementSibling.scrollIntoView()`);
    await page.screenshot({ path: join(shots, 'live-trend-phone-turned.png') });
    for (const w of turned.charts) {
      expect(w).toBeLessThanOrEqual(TURNED.width);
      expect(w).toBeGreaterThan(TURNED.width * 0.8); // the charts followed the rotation
    }
    await page.setViewportSize(PHONE);
    await page.waitForTimeout(500);
    const back = await fits('vectors, upright again');
    expect(back.charts).toEqual(upright.charts);
  }, 90_000);

  it('balancing (no job, an open job with its capture and trial forms, the tools), records and report fit at 390 px and turned', async () => {
    await show('#job', '#view-job:not([hidden]) form, #view-job:not([hidden]) button');
    await fits('balancing, no job');
    // A single-plane job with its as-found run captured, so the runs table, the trial suggestion
    // and the trial form are on the screen.
    const post = async (path: string, body: unknown) => {
      const res = await fetch(url + path.slice(1), {
        method: 'POST',
        headers: { Authorization: `Bearer ${OPERATOR}`, 'Content-Type': 'application/json' },
        body: JSON.stringify(body),
      });
      expect(res.status, path).toBe(200);
      return (await res.json()) as any;
    };
    const created = await post('/api/jobs', {
      kind: 'single_plane',
      by: 'P. Phone (invented)',
      planes: [{ name: 'front_shroud', radius_mm: 600, positions: { count: 12 } }],
      rotor_mass_kg: 850,
    });
    jobId = created.view.job.job_id;
    await post(`/api/jobs/${jobId}/capture`, { revolutions: 40 });
    await page.waitForSelector('#view-job:has-text("declare the trial run")', { timeout: 60_000 });
    await page.waitForTimeout(300);
    await fits('balancing, open job');
    await page.evaluate(
      `document.querySelectorAll('#view-job details').forEach((d) => { d.open = true; })`,
    );
    await page.waitForTimeout(200);
    await fits('balancing, open job, tools open');
    if (process.env.TURNWISE_SCREENSHOT_DIR) {
      await page.screenshot({ path: join(shots, 'workbench-phone.png'), fullPage: true });
      await page.locator('#view-job h2', { hasText: 'Runs' }).scrollIntoViewIfNeeded();
      await page.screenshot({ path: join(shots, 'workbench-runs-phone.png') });
    }
    await page.setViewportSize(TURNED);
    await page.waitForTimeout(300);
    await fits('balancing, turned');
    await page.setViewportSize(PHONE);

    await show('#records', `#view-records:not([hidden]) a[href*="${jobId}"]`);
    await fits('job records');
    await page.setViewportSize(TURNED);
    await page.waitForTimeout(300);
    await fits('job records, turned');
    await page.setViewportSize(PHONE);

    await show(`#report/${encodeURIComponent(jobId)}`, '#view-report:not([hidden]) table');
    await fits('report');
    await page.setViewportSize(TURNED);
    await page.waitForTimeout(300);
    await fits('report, turned');
    await page.setViewportSize(PHONE);
    expect(pageErrors).toEqual([]);
  }, 120_000);
});
