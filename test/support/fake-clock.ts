import type { Clock } from '../../agent/watcher/clock.js';

/** A clock the test moves by hand. */
export class FakeClock implements Clock {
  constructor(private ms: number) {}
  now(): number {
    return this.ms;
  }
  advance(seconds: number): void {
    this.ms += seconds * 1000;
  }
}
