/**
 * The project's own GPIO interface. The onoff (sysfs) adapter implements it on the board; a
 * character-device adapter can replace it later; tests use the fake. Line numbers in the config are
 * chip-relative offsets; adapters add the chip's base themselves.
 */
export interface DigitalOutput {
  /** Drives the line: true = energised / high (after any active-low inversion in the adapter). */
  write(on: boolean): Promise<void>;
  read(): Promise<boolean>;
  /**
   * Lets go of the handle. The line stays driven at its last level: a line handed back to the
   * kernel may float, and a floating relay input is not a defined state.
   */
  close(): Promise<void>;
}

export type EdgeListener = (value: boolean, atMs: number) => void;

export interface DigitalInput {
  read(): Promise<boolean>;
  /** Calls the listener on each debounced change; returns a function that removes it. */
  watch(listener: EdgeListener): () => void;
  close(): Promise<void>;
}

export interface GpioLines {
  output(
    name: string,
    line: number,
    opts?: { activeLow?: boolean; initial?: boolean },
  ): Promise<DigitalOutput>;
  input(
    name: string,
    line: number,
    opts?: { activeLow?: boolean; debounceMs?: number; edge?: 'rising' | 'falling' | 'both' },
  ): Promise<DigitalInput>;
}
