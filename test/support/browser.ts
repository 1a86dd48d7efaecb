import { chromium, type Browser } from 'playwright-core';
import type { Pacer } from '../../drivers/sim/source.js';

/**
 * Debian's chromium (/usr/bin/chromium), headless, for the page tests. The background-networking
 * flags keep it from calling out of this machine's closed network at every start.
 */
const CHROMIUM_ARGS = [
  '--headless',
  '--no-sandbox',
  '--disable-gpu',
  '--disable-quic',
  '--no-first-run',
  '--disable-background-networking',
  '--disable-component-update',
  '--disable-sync',
];

export function launchChromium(): Promise<Browser> {
  return chromium.launch({ executablePath: '/usr/bin/chromium', args: CHROMIUM_ARGS });
}

/** Paces the simulated board K times faster than real time. */
export function fastPacer(k: number): Pacer {
  const t0 = performance.now();
  return {
    now: () => t0 + (performance.now() - t0) * k,
    sleep: (ms) => new Promise((resolve) => setTimeout(resolve, ms / k)),
  };
}
