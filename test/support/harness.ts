import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach } from 'vitest';

/**
 * Per-test resources released after each test, last first (clients before brokers before
 * directories). Call once at the top of a test file.
 */
export function testResources(tmpPrefix: string) {
  const cleanups: Array<() => Promise<unknown> | unknown> = [];
  afterEach(async () => {
    for (const c of cleanups.splice(0).reverse()) await c();
  });
  return {
    /** Runs `fn` after the current test. */
    defer(fn: () => Promise<unknown> | unknown): void {
      cleanups.push(fn);
    },
    /** A fresh temporary directory, deleted after the test. */
    tmpDir(): string {
      const d = mkdtempSync(join(tmpdir(), tmpPrefix));
      cleanups.push(() => rmSync(d, { recursive: true, force: true }));
      return d;
    },
  };
}

/** Polls `pred` every 20 ms; throws naming `what` after `ms`. */
export async function until(pred: () => boolean, ms: number, what: string): Promise<void> {
  const end = Date.now() + ms;
  while (!pred()) {
    if (Date.now() > end) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

/** A topic prefix no other test uses (tests may share one broker). */
export function uniquePrefix(): string {
  return `test/${Math.random().toString(36).slice(2, 10)}`;
}
