/**
 * GpioLines for tests and machines without GPIO. Behaves like the real adapter as far as the
 * agent can tell (line numbers checked for reuse, closed lines refuse use, edges filtered) and lets
 * a test press the button, pulse the tach, read back the relay and lamp, and break a line.
 * Debouncing is not simulated: inputs change exactly when the test says.
 */
import type { DigitalInput, DigitalOutput, EdgeListener, GpioLines } from './types.js';

export interface OutputChange {
  readonly on: boolean;
  readonly atMs: number;
}

class FakeLine {
  value: boolean;
  closed = false;
  failure: Error | null = null;
  readonly history: OutputChange[] = [];
  /** Every level written, changed or not, in order (not the initial level). */
  readonly writes: boolean[] = [];
  readonly listeners = new Set<EdgeListener>();

  constructor(
    readonly name: string,
    readonly line: number,
    readonly kind: 'output' | 'input',
    initial: boolean,
    readonly edge: 'rising' | 'falling' | 'both',
  ) {
    this.value = initial;
  }

  check(): void {
    if (this.closed) throw new Error(`GPIO "${this.name}" is closed`);
    if (this.failure) throw this.failure;
  }
}

export class FakeGpioLines implements GpioLines {
  private readonly lines = new Map<string, FakeLine>();
  private readonly nowMs: () => number;

  constructor(opts: { nowMs?: () => number } = {}) {
    this.nowMs = opts.nowMs ?? Date.now;
  }

  private add(
    name: string,
    line: number,
    kind: 'output' | 'input',
    initial: boolean,
    edge: 'rising' | 'falling' | 'both',
  ): FakeLine {
    const byName = this.lines.get(name);
    if (byName && !byName.closed) throw new Error(`GPIO name "${name}" is already in use`);
    for (const l of this.lines.values())
      if (l.line === line && !l.closed)
        throw new Error(`GPIO line ${line} is already used by "${l.name}"`);
    const l = new FakeLine(name, line, kind, initial, edge);
    this.lines.set(name, l);
    return l;
  }

  async output(
    name: string,
    line: number,
    opts: { activeLow?: boolean; initial?: boolean } = {},
  ): Promise<DigitalOutput> {
    const l = this.add(name, line, 'output', opts.initial ?? false, 'both');
    l.history.push({ on: l.value, atMs: this.nowMs() });
    return {
      write: async (on) => {
        l.check();
        l.writes.push(on);
        if (on !== l.value) l.history.push({ on, atMs: this.nowMs() });
        l.value = on;
      },
      read: async () => {
        l.check();
        return l.value;
      },
      close: async () => {
        l.closed = true;
      },
    };
  }

  async input(
    name: string,
    line: number,
    opts: { activeLow?: boolean; debounceMs?: number; edge?: 'rising' | 'falling' | 'both' } = {},
  ): Promise<DigitalInput> {
    const l = this.add(name, line, 'input', false, opts.edge ?? 'both');
    return {
      read: async () => {
        l.check();
        return l.value;
      },
      watch: (listener) => {
        l.check();
        l.listeners.add(listener);
        return () => l.listeners.delete(listener);
      },
      close: async () => {
        l.closed = true;
        l.listeners.clear();
      },
    };
  }

  private get(name: string, kind: 'output' | 'input'): FakeLine {
    const l = this.lines.get(name);
    if (!l || l.kind !== kind)
      throw new Error(
        `no ${kind} named "${name}" (have: ${[...this.lines.keys()].join(', ') || 'none'})`,
      );
    return l;
  }

  /**
   * Drives an input to `value` (logical level) as the outside world would; listeners see it if
   * their edge matches.
   */
  setInput(name: string, value: boolean, atMs = this.nowMs()): void {
    const l = this.get(name, 'input');
    if (l.value === value) return;
    l.value = value;
    if (l.closed) return;
    if (l.edge === 'both' || (l.edge === 'rising') === value)
      for (const fn of [...l.listeners]) fn(value, atMs);
  }

  /** Presses a button (input goes active) ... */
  press(name: string, atMs?: number): void {
    this.setInput(name, true, atMs);
  }

  /** ... and lets it go. */
  release(name: string, atMs?: number): void {
    this.setInput(name, false, atMs);
  }

  /** One short pulse (active then inactive) at `atMs`, e.g. a tach mark passing the pickup. */
  pulse(name: string, atMs: number): void {
    this.setInput(name, true, atMs);
    this.setInput(name, false, atMs);
  }

  /** Current level of an output (logical). */
  level(name: string): boolean {
    return this.get(name, 'output').value;
  }

  /** Every level an output took, starting with its initial level. */
  history(name: string): readonly OutputChange[] {
    return this.get(name, 'output').history;
  }

  /** Every level written to an output, changed or not (a fail-safe output is written at start). */
  writes(name: string): readonly boolean[] {
    return this.get(name, 'output').writes;
  }

  isClosed(name: string): boolean {
    const l = this.lines.get(name);
    return l ? l.closed : false;
  }

  /** From now on every read and write of the line fails with `err` (null mends it). */
  breakLine(name: string, err: Error | null): void {
    const l = this.lines.get(name);
    if (!l) throw new Error(`no line named "${name}"`);
    l.failure = err;
  }
}
