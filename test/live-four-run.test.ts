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
import { loadScenario, parseAt, resolveScenario } from '../drivers/sim/scenario.js';
import { SimSource, type Pacer } from '../drivers/sim/source.js';

/**
 * Balancing without phase on the live page, in a real browser (Debian chromium via
 * playwright-core), against the whole measuring loop on the simulated demo fan (invented Kessrow
 * ID-3A, day 5 15:00, after weight W1 was thrown) with the tach pickup LOST:
 * SimSource -> AgentRuntime -> live server. The test plays the technician: fits the trial weight at
 * 0/120/240 deg on the simulated fan, presses "Read" for each amplitude, works out the correction
 * on the page, fits it, and checks the 1x.
 */

const OPERATOR = 'operator-0123456789abcdef-op';
/** What the test reads of the page's document (the project compiles without the DOM library). */
type Doc = { document: { querySelector(sel: string): { textContent: string | null } | null } };
const SPEED_UP = 8;
describe('four-run balancing on the live page with the tach lost', () => {
  let dir: string;
  let src: SimSource;
  let rt: AgentRuntime;
  let running: Promise<unknown>;
  let server: LiveServer;
  let browser: Browser;
  let page: Page;
  let url: string;
  const pageErrors: string[] = [];

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'tw-live-fourrun-'));
    const cfg = validateConfig({
      ...loadConfig('config/example.yaml'),
      state_dir: dir,
      live: {
        port: 0,
        tokens: [{ name: 'balancing-crew', role: 'operator', env: 'TW_PAGE_OPERATOR' }],
        update_hz: 4,
      },
    });
    const scenario = loadScenario('config/example-scenario.yaml');
    const lostAt = parseAt('day 5 14:40')!;
    const k = scenario.timeline.findIndex((e) => e.at > lostAt);
    scenario.timeline.splice(k < 0 ? scenario.timeline.length : k, 0, {
      at: lostAt,
      tach_fault: { kind: 'lost', missing_fraction: 1 },
    } as (typeof scenario.timeline)[number]);
    src = new SimSource(resolveScenario(scenario, cfg), {
      startS: 5.625 * 86400,
      blockSamples: 2560,
      pace: 'realtime',
      pacer: fastPacer(SPEED_UP),
    });
    const logger = new MemoryLogger();
    server = LiveServer.fromConfig(
      cfg,
      { logger, clock: systemClock, emit: () => undefined, onCoefficientsSaved: () => undefined },
      { TW_PAGE_OPERATOR: OPERATOR },
    );
    url = (await server.start()).url;
    rt = new AgentRuntime({
      config: cfg,
      source: src,
      clock: systemClock,
      logger,
      windowSeconds: 4,
      liveSeconds: 0.5,
      windowConsumers: [server],
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
    rmSync(dir, { recursive: true, force: true });
  });

  /**
   * Waits until two analysis windows have closed after now (the first may straddle a weight
   * change).
   */
  async function freshWindows(): Promise<void> {
    const start = src.scenarioTimeS;
    while (src.scenarioTimeS < start + 9) await new Promise((r) => setTimeout(r, 50));
  }

  async function read(field: string): Promise<number> {
    const before = await page.textContent('#fourrun-read');
    await page.click(`#fourrun button[data-reads="${field}"]`);
    await page.waitForFunction(
      (b) =>
        ((globalThis as unknown as Doc).document.querySelector('#fourrun-read')?.textContent ??
          '') !== b,
      before,
    );
    expect(await page.textContent('#fourrun-read')).toMatch(
      /spectral peak at 24\.\d+ Hz \(no tach\)|below the peak threshold/,
    );
    return Number(await page.inputValue(`#fourrun [name="${field}"]`));
  }

  it('reads the amplitudes from the spectrum, gives a weight that brings the 1x below 15 % of as found, with the cautions', async () => {
    await page.goto(url);
    await page.fill('#token', OPERATOR);
    await page.click('#login-form button');
    await page.waitForSelector('#view-live:not([hidden])', { timeout: 30_000 });
    await page.click('nav a[data-nav=job]');
    await page.click('details.tools summary');
    await page.selectOption('#fourrun [name=fr_sensor]', 'DE-H');
    await page.fill('#fourrun [name=fr_mass]', '100');
    await page.fill('#fourrun [name=fr_radius]', '760');
    await freshWindows();
    const asFound = await read('fr_a0');
    expect(asFound).toBeGreaterThan(1);
    for (const [i, angle] of [0, 120, 240].entries()) {
      src.addWeight({
        id: 'T',
        plane: 'back_plate',
        mass_g: 100,
        radius_mm: 760,
        angle_deg: angle,
        convention: 'against_rotation',
      });
      await freshWindows();
      await read(`fr_a${i + 1}`);
      src.removeWeight('T');
    }
    await page.click('#fourrun button[type=submit]');
    const answer = page.locator('#fourrun-result .fourrun-answer');
    await answer.waitFor();
    const mass = Number(await answer.getAttribute('data-mass'));
    const angle = Number(await answer.getAttribute('data-angle'));
    const text = await page.textContent('#fourrun-result');
    expect(text).toMatch(/with the trial weight removed/);
    expect(text).toMatch(/Watch the vibration during every trial and check run/);
    expect(text).toMatch(/confined-space entry/);
    src.addWeight({
      id: 'C',
      plane: 'back_plate',
      mass_g: mass,
      radius_mm: 760,
      angle_deg: angle,
      convention: 'against_rotation',
    });
    await freshWindows();
    const after = await read('fr_a0');
    console.log(
      `four-run on the page: as found ${asFound} mm/s pk; correction ` +
        `${mass.toFixed(1)} g at ${angle.toFixed(1)} deg; check ${after} mm/s ` +
        `pk = ${((after / asFound) * 100).toFixed(1)} % of as found`,
    );
    expect(after / asFound).toBeLessThan(0.15);
    expect(pageErrors).toEqual([]);
  }, 120_000);

  it('refuses readings that do not move, on the page', async () => {
    for (const f of ['fr_a0', 'fr_a1', 'fr_a2', 'fr_a3'])
      await page.fill(`#fourrun [name=${f}]`, '5.0');
    await page.click('#fourrun button[type=submit]');
    await page.waitForSelector('#fourrun-result [data-ok=false]');
    expect(await page.textContent('#fourrun-result')).toMatch(
      /No correction given.*within twice the reading scatter/s,
    );
  });
});
