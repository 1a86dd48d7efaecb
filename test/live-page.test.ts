import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Browser, Page } from 'playwright-core';
import { fastPacer, launchChromium } from './support/browser.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { systemClock } from '../agent/clock.js';
import { loadConfig, validateConfig } from '../agent/config/load.js';
import type { AgentEvent } from '../agent/events.js';
import { LiveServer } from '../agent/live/server.js';
import { MemoryLogger } from '../agent/log.js';
import { AgentRuntime } from '../agent/runtime/runtime.js';
import { openWatcher } from '../agent/watcher/index.js';
import { loadScenario, resolveScenario } from '../drivers/sim/scenario.js';
import { SimSource, type Pacer } from '../drivers/sim/source.js';

/**
 * The live page in a real browser (Debian chromium driven by playwright-core) against the whole
 * agent loop on the simulated demo fan (invented Kessrow ID-3A, day 5 15:00, just after balance
 * weight W1 was thrown): SimSource -> AgentRuntime (measurement core) -> watcher and live page.
 * The simulated fan runs 8 times faster than real time. The test plays the technician: it reads the
 * weight changes the page asks for and fits them on the simulated fan, and it clicks through a
 * two-plane job (in the with-rotation convention) to a check run below 10 % of as found.
 *
 * Set TURNWISE_SCREENSHOT_DIR to keep the screenshots (docs/ holds the committed ones).
 */

const VIEWER = 'viewer-0123456789abcdef-viewer';
const OPERATOR = 'operator-0123456789abcdef-op';
const SPEED_UP = 8;
/** What the tests read of a DOM element (the project compiles without the DOM library). */
type El = { dataset: Record<string, string | undefined> };
describe('live page in a real browser', () => {
  let dir: string;
  let shots: string;
  let src: SimSource;
  let rt: AgentRuntime;
  let running: Promise<unknown>;
  let server: LiveServer;
  let browser: Browser;
  let page: Page;
  let url: string;
  const events: AgentEvent[] = [];
  const pageErrors: string[] = [];
  let reloads = 0;
  /** The correction weights fitted on the simulated fan by the job (as the page listed them). */
  let corrections: Record<string, string | undefined>[] = [];

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'tw-live-page-'));
    shots = process.env.TURNWISE_SCREENSHOT_DIR ?? dir;
    const cfg = validateConfig({
      ...loadConfig('config/example.yaml'),
      state_dir: dir,
      live: {
        port: 0,
        tokens: [
          { name: 'control-room', role: 'viewer', env: 'TW_PAGE_VIEWER' },
          { name: 'balancing-crew', role: 'operator', env: 'TW_PAGE_OPERATOR' },
        ],
        update_hz: 4,
      },
    });
    const plan = resolveScenario(loadScenario('config/example-scenario.yaml'), cfg);
    src = new SimSource(plan, {
      startS: 5.625 * 86400,
      blockSamples: 2560,
      pace: 'realtime',
      pacer: fastPacer(SPEED_UP),
    });
    const logger = new MemoryLogger();
    const watcher = openWatcher(cfg);
    server = LiveServer.fromConfig(
      cfg,
      {
        logger,
        clock: systemClock,
        emit: (e) => void events.push(e),
        onCoefficientsSaved: () => void (reloads++, watcher.reloadCoefficients()),
      },
      { TW_PAGE_VIEWER: VIEWER, TW_PAGE_OPERATOR: OPERATOR },
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
    page = await browser.newPage({ viewport: { width: 412, height: 915 }, deviceScaleFactor: 1 });
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

  it('asks for the token, then shows every sensor with its 1x vector updating', async () => {
    await page.goto(url);
    await page.waitForSelector('#login:not([hidden])');
    await page.fill('#token', 'not-the-token-0000000000');
    await page.click('#login-form button');
    await page.waitForSelector('#login-msg .msg-error');
    expect(await page.textContent('#login-msg')).toMatch(/not accepted/);
    await page.fill('#token', OPERATOR);
    await page.click('#login-form button');
    await page.waitForSelector('#view-live:not([hidden]) .card[data-at-ms]:not([data-at-ms=""])', {
      timeout: 30_000,
    });
    expect(await page.evaluate('sessionStorage.getItem("turnwise.token")')).toBe(OPERATOR);
    pageErrors.length = 0; // the refused token above is logged by the browser as a failed request
    expect(await page.locator('.card').count()).toBe(6);

    // At least two updates of the vectors within 3 s (the page draws at most update_hz = 4 per
    // second).
    const seen = new Set<string>();
    const t0 = Date.now();
    while (Date.now() - t0 < 3000) {
      seen.add(
        await page
          .locator('.card[data-sensor="DE-V"]')
          .evaluate(
            (el) => `${(el as unknown as El).dataset.atMs}/${(el as unknown as El).dataset.phase}`,
          ),
      );
      await page.waitForTimeout(150);
    }
    expect(seen.size).toBeGreaterThanOrEqual(3);
    // The page shows what the measurement core measures: DE-V near the model's 1x
    // (docs/simulator.md: 2.56 mm/s r.m.s. = 3.62 mm/s pk at 104 deg at day 5 15:00).
    const amp = Number(await page.locator('.card[data-sensor="DE-V"]').getAttribute('data-amp'));
    const phase = Number(
      await page.locator('.card[data-sensor="DE-V"]').getAttribute('data-phase'),
    );
    expect(amp).toBeGreaterThan(3.4);
    expect(amp).toBeLessThan(3.85);
    expect(Math.abs(phase - 104)).toBeLessThan(3);
    expect(await page.textContent('.card[data-sensor="DE-V"] .big')).toMatch(/^\d+\.\d\d$/);
    // Zones and sensor health arrive with the watcher's status after each window.
    await page.waitForSelector('.card[data-sensor="DE-V"] .okbadge.ok-yes', { timeout: 20_000 });
    await page.waitForFunction('document.querySelectorAll("#trend canvas").length >= 2');
    await page.waitForTimeout(2500); // a few trend points
    await page.screenshot({ path: join(shots, 'live-view.png') });
    expect(statSync(join(shots, 'live-view.png')).size).toBeGreaterThan(10_000);
    await page.setViewportSize({ width: 1280, height: 1200 });
    await page.waitForTimeout(600);
    await page.screenshot({ path: join(shots, 'live-view-wide.png') });
  });

  it('completes a two-plane job from the page on the simulated fan, final 1x below 10 % of as found', async () => {
    await page.setViewportSize({ width: 1100, height: 1000 });
    await page.click('nav a[data-nav=job]');
    await page.waitForSelector('#start-form');
    await page.selectOption('#f-kind', 'two_plane');
    await page.check('input[name=convention][value=with_rotation]');
    await page.fill('#f-by', 'T. Technician (invented)');
    await page.fill('#f-plane0_name', 'back_plate');
    await page.fill('#f-plane0_radius', '760');
    await page.fill('#f-plane1_name', 'front_shroud');
    await page.fill('#f-plane1_radius', '760');
    await page.fill('#f-rotor', '850');
    await page.click('#job-start');
    await page.waitForSelector('.conv-banner[data-convention="with_rotation"]');
    expect(await page.textContent('#view-job .conv-banner')).toMatch(/WITH rotation/);

    /** Fits on the simulated fan what the page says was changed for this run. */
    const applyPlacement = async (run: number) => {
      await page.waitForSelector(`#placement[data-run="${run}"]`);
      const items = await page.$$eval('#placement li', (lis) =>
        lis.map((li) => ({ ...(li as unknown as El).dataset })),
      );
      expect(items.length).toBeGreaterThan(0);
      for (const it of items) {
        if (it.action === 'remove') expect(src.removeWeight(it.id!)).toBe(true);
        else
          src.addWeight({
            id: it.id!,
            plane: it.plane!,
            mass_g: Number(it.massG),
            radius_mm: Number(it.radiusMm),
            angle_deg: Number(it.angleDeg),
            convention: 'with_rotation',
          });
      }
      return items;
    };
    const capture = async (run: number) => {
      await page.click('#capture-start');
      await page.waitForSelector(`#runs tr[data-run="${run}"][data-captured="yes"]`, {
        timeout: 60_000,
      });
    };
    const declare = async () => {
      // not before the cautions are acknowledged
      expect(await page.isDisabled('#declare-run')).toBe(true);
      expect(await page.textContent('#cautions')).toMatch(/Lock out and tag out/);
      await page.check('#ack');
      await page.click('#declare-run');
    };

    await capture(0);
    // Trial 1: the suggested trial weight (10 % of the rotor weight on one bearing, common
    // practice).
    await page.waitForSelector('#trial-form');
    expect(await page.textContent('#trial-suggestion')).toMatch(/Suggested: 23 g at 760 mm/);
    expect(await page.textContent('#cautions')).toMatch(
      /23\.0 g at 760 mm pulls F = m r ω² = 4\d\d N at 148\d r\/min \(10 % of the rotor weight on one bearing\)/,
    );
    if (process.env.TURNWISE_SCREENSHOT_DIR)
      await page.screenshot({ path: join(shots, 'trial-form.png'), fullPage: true });
    await declare();
    expect((await applyPlacement(1)).map((i) => `${i.action} ${i.id} ${i.plane}`)).toEqual([
      'fit T1 back_plate',
    ]);
    await capture(1);
    expect(
      await page.getAttribute('.trial-check[data-run="1"][data-where="runs"]', 'data-enough'),
    ).toBe('yes');
    // Trial 2: in the front shroud, trial 1 taken off (the form's default).
    await page.waitForSelector('#trial-form');
    await declare();
    expect((await applyPlacement(2)).map((i) => `${i.action} ${i.id} ${i.plane}`)).toEqual([
      'remove T1 back_plate',
      'fit T2 front_shroud',
    ]);
    await capture(2);
    await page.click('#solve');
    await page.waitForSelector('#solution[data-ok="yes"]');
    // The scenario's unbalance, turned 180 deg and mirrored into the with-rotation convention
    // (test/sim-balance.test.ts works out the against-rotation truth the same way).
    const corr = await page.$$eval('#corrections tr[data-plane]', (rows) =>
      rows.map((r) => ({ ...(r as unknown as El).dataset })),
    );
    const truth = (parts: [number, number][]) => {
      const re = parts.reduce((s, [m, a]) => s + m * Math.cos((a * Math.PI) / 180), 0);
      const im = parts.reduce((s, [m, a]) => s + m * Math.sin((a * Math.PI) / 180), 0);
      const against = ((Math.atan2(im, re) * 180) / Math.PI + 180 + 360) % 360;
      return { mass_g: Math.hypot(re, im), with_deg: (360 - against) % 360 };
    };
    const expected: Record<string, { mass_g: number; with_deg: number }> = {
      back_plate: truth([[55, 200]]),
      front_shroud: truth([
        [9, 310],
        [26.25, 130],
      ]),
    };
    for (const c of corr) {
      const t = expected[c.plane!]!;
      expect(Math.abs(Number(c.massG) - t.mass_g)).toBeLessThan(0.1 * t.mass_g);
      const d = ((Number(c.angleDeg) - t.with_deg + 540) % 360) - 180;
      expect(Math.abs(d)).toBeLessThan(6);
    }
    // Fit the corrections with the trial weights off.
    await page.waitForSelector('#correction-form');
    expect(await page.textContent('#correction-form .conv-banner')).toMatch(/WITH rotation/);
    await page.waitForFunction(
      'document.querySelector("#cautions").textContent.includes("weight in front_shroud")',
    );
    // F = m r omega^2 of the proposed weights, shown before the change (about 1000 N for 55 g
    // here).
    expect(await page.textContent('#cautions')).toMatch(
      /weight in back_plate: 5\d\.\d g at 760 mm pulls F = m r ω² = \d{3,4} N/,
    );
    await declare();
    const placed = await applyPlacement(3);
    expect(placed.map((i) => `${i.action} ${i.id}`)).toEqual(['remove T2', 'fit C1', 'fit C2']);
    corrections = placed.filter((i) => i.action === 'fit');
    await capture(3);
    await page.waitForSelector('.residual[data-run="3"][data-where="latest"]');
    const pcts = await page.$$eval(
      '.residual[data-run="3"][data-where="runs"] tr[data-pct]',
      (rows) => rows.map((r) => Number((r as unknown as El).dataset.pct)),
    );
    expect(pcts).toHaveLength(4);
    for (const p of pcts) expect(p).toBeLessThan(10);
    await page.evaluate('window.scrollTo(0, 0)');
    await page.screenshot({ path: join(shots, 'workbench.png') });
    if (process.env.TURNWISE_SCREENSHOT_DIR)
      await page.screenshot({ path: join(shots, 'workbench-full.png'), fullPage: true });

    await page.click('#finish');
    await page.waitForSelector('#view-job .msg-ok a[href^="#report/"]');
    expect(reloads).toBe(1);
    const types = events.map((e) => e.type);
    expect(types.filter((t) => t === 'balancing_run_captured')).toHaveLength(4);
    expect(types.at(-1)).toBe('balancing_job_finished');

    // The printable report: every run, the convention, who did what.
    await page.click('#view-job .msg-ok a[href^="#report/"]');
    await page.waitForSelector('#report');
    const report = (await page.textContent('#report'))!;
    expect(report).toMatch(
      /Conventions: weight angles in degrees from the reference mark, measured WITH rotation/,
    );
    for (const label of ['as found', 'trial 1', 'trial 2', 'check'])
      expect(report).toContain(label);
    expect(report).toContain('T. Technician (invented)');
    const pdf = await page.pdf({ path: join(shots, 'report.pdf'), format: 'A4' });
    expect(pdf.length).toBeGreaterThan(20_000);
    if (process.env.TURNWISE_SCREENSHOT_DIR) {
      await page.emulateMedia({ media: 'print' });
      await page.screenshot({ path: join(shots, 'report-print.png'), fullPage: true });
      await page.emulateMedia({ media: 'screen' });
    }
    expect(pageErrors).toEqual([]);
  });

  it("shows the watcher's correction forecast from the job's coefficients: when a correction weight is thrown, it forecasts its replacement", async () => {
    // The job's coefficients went to the watcher (reloads === 1 above); it has no baseline, so the
    // forecast aims at zero 1x (influence-coefficient method: W = least squares of H W = -V).
    await page.click('nav a[data-nav=live]');
    await page.waitForSelector('#forecast tr[data-plane]', { timeout: 30_000 });
    expect(await page.textContent('#forecast .conv-banner')).toMatch(/measured WITH rotation/);
    expect(await page.textContent('#forecast .cautions')).toMatch(/Lock out and tag out/);
    const c1 = corrections.find((c) => c.id === 'C1')!;
    expect(c1.plane).toBe('back_plate');
    // The weight C1 flies off the simulated fan.
    expect(src.removeWeight('C1')).toBe(true);
    await page.waitForFunction(
      (m) =>
        Number(
          (
            globalThis as unknown as { document: { querySelector(q: string): El | null } }
          ).document.querySelector('#forecast tr[data-plane="back_plate"]')?.dataset.massG,
        ) > m,
      0.5 * Number(c1.massG),
      { timeout: 30_000 },
    );
    await new Promise((r) => setTimeout(r, 2000)); // a few more windows on the new state
    const rows = await page.$$eval('#forecast tr[data-plane]', (trs) =>
      trs.map((r) => ({ ...(r as unknown as El).dataset })),
    );
    const back = rows.find((r) => r.plane === 'back_plate')!;
    const front = rows.find((r) => r.plane === 'front_shroud')!;
    console.log(
      `thrown C1 ${Number(c1.massG).toFixed(1)} g at ` +
        `${Number(c1.angleDeg).toFixed(0)} deg; forecast back_plate ` +
        `${Number(back.massG).toFixed(1)} g at ${Number(back.angleDeg).toFixed(0)} deg, ` +
        `front_shroud ${Number(front.massG).toFixed(1)} g`,
    );
    // The replacement: C1's mass and angle (same convention, same radius), the other plane about
    // untouched.
    expect(back.radiusMm).toBe('760');
    expect(Math.abs(Number(back.massG) / Number(c1.massG) - 1)).toBeLessThan(0.15);
    expect(
      Math.abs(((Number(back.angleDeg) - Number(c1.angleDeg) + 540) % 360) - 180),
    ).toBeLessThan(10);
    expect(Number(front.massG)).toBeLessThan(0.25 * Number(c1.massG));
    expect(pageErrors).toEqual([]);
  }, 60_000);

  it('shows a viewer the job but no way to change it', async () => {
    const viewer = await browser.newPage({ viewport: { width: 800, height: 900 } });
    try {
      await viewer.goto(url + '#job');
      await viewer.fill('#token', VIEWER);
      await viewer.click('#login-form button');
      await viewer.waitForSelector('#role');
      await viewer.waitForFunction(
        'document.querySelector("#role").textContent.includes("viewer: read only")',
      );
      await viewer.click('nav a[data-nav=job]');
      await viewer.waitForSelector('#view-job .msg-warn');
      expect(await viewer.textContent('#view-job')).toMatch(
        /No balancing job is open.*viewer token: an operator token is needed/is,
      );
      expect(await viewer.locator('#view-job button.primary').count()).toBe(0);
      await viewer.click('nav a[data-nav=records]');
      await viewer.waitForSelector('#records tr[data-job]');
      expect(await viewer.locator('#records tr[data-job]').count()).toBe(1);
    } finally {
      await viewer.close();
    }
  });
});
