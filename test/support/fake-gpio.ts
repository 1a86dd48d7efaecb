import type { DigitalInput, DigitalOutput, EdgeListener, GpioLines } from '../../drivers/gpio/types.js';

/**
 * GPIO lines in memory (CI and developer machines have no GPIO). Outputs record every level
 * written; `failWrites` makes writes reject like a lost board; inputs are driven with `set()`.
 */
export class FakeOutput implements DigitalOutput {
  readonly writes: boolean[] = [];
  level: boolean;
  failWrites = false;
  closed = false;
  constructor(
    readonly name: string,
    readonly line: number,
    initial: boolean,
  ) {
    this.level = initial;
  }
  async write(on: boolean): Promise<void> {
    if (this.failWrites) throw Object.assign(new Error(`EIO writing line ${this.line}`), { code: 'EIO' });
    this.level = on;
    this.writes.push(on);
  }
  async read(): Promise<boolean> {
    return this.level;
  }
  async close(): Promise<void> {
    this.closed = true;
  }
}

export class FakeInput implements DigitalInput {
  level = false;
  private readonly listeners = new Set<EdgeListener>();
  constructor(
    readonly name: string,
    readonly line: number,
  ) {}
  set(value: boolean): void {
    if (value === this.level) return;
    this.level = value;
    for (const l of this.listeners) l(value, Date.now());
  }
  async read(): Promise<boolean> {
    return this.level;
  }
  watch(listener: EdgeListener): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }
  async close(): Promise<void> {
    this.listeners.clear();
  }
}

export class FakeGpio implements GpioLines {
  readonly outputs = new Map<number, FakeOutput>();
  readonly inputs = new Map<number, FakeInput>();
  async output(name: string, line: number, opts?: { activeLow?: boolean; initial?: boolean }): Promise<DigitalOutput> {
    const o = new FakeOutput(name, line, opts?.initial ?? false);
    this.outputs.set(line, o);
    return o;
  }
  async input(name: string, line: number): Promise<DigitalInput> {
    const i = new FakeInput(name, line);
    this.inputs.set(line, i);
    return i;
  }
}
