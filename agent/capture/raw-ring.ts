/**
 * The last few seconds of raw samples, every channel of the source (sensors and tach), in volts:
 * the pre-event part of an event capture. One Float32Array per channel is allocated when the ring
 * is built; `write` copies blocks in and allocates nothing, so it costs no allocation per sample.
 * Memory: channels x capacity x 4 bytes.
 */
export class RawRing {
  private readonly data: Float32Array[];
  readonly capacity: number;
  /** Absolute sample index one past the newest sample held. */
  end = 0;
  /**
   * Absolute sample index of the oldest sample that is part of the current run (after a gap: the
   * gap's end).
   */
  private runStart = 0;

  constructor(
    readonly channels: number,
    capacity: number,
  ) {
    this.capacity = Math.max(1, Math.ceil(capacity));
    this.data = Array.from({ length: channels }, () => new Float32Array(this.capacity));
  }

  get bytes(): number {
    return this.channels * this.capacity * 4;
  }

  /** Oldest absolute index still held and contiguous with `end`. */
  get start(): number {
    return Math.max(this.runStart, this.end - this.capacity);
  }

  /** Appends a block; a block that does not follow the previous one starts a new run (a gap). */
  write(block: readonly Float32Array[], startIndex: number): void {
    const n = block[0]?.length ?? 0;
    if (startIndex !== this.end) this.runStart = startIndex;
    const cap = this.capacity;
    // Only the last `cap` samples of a block larger than the ring matter.
    const skip = Math.max(0, n - cap);
    for (let c = 0; c < this.channels; c++) {
      const src = block[c]!;
      const dst = this.data[c]!;
      let w = (startIndex + skip) % cap;
      let i = skip;
      while (i < n) {
        const run = Math.min(n - i, cap - w);
        dst.set(src.subarray(i, i + run), w);
        i += run;
        w = 0;
      }
    }
    this.end = startIndex + n;
  }

  /**
   * Copies samples [from, to) of every channel into `dest` (each at least to - from long); the
   * caller checks `start`.
   */
  copy(from: number, to: number, dest: readonly Float32Array[]): void {
    if (from < this.start || to > this.end || to < from)
      throw new RangeError(`samples ${from}-${to} not held (${this.start}-${this.end})`);
    const cap = this.capacity;
    for (let c = 0; c < this.channels; c++) {
      const src = this.data[c]!;
      const out = dest[c]!;
      let r = from % cap;
      let o = 0;
      const n = to - from;
      while (o < n) {
        const run = Math.min(n - o, cap - r);
        out.set(src.subarray(r, r + run), o);
        o += run;
        r = 0;
      }
    }
  }
}
