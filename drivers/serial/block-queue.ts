/**
 * The hand-over between the serial port (which delivers frames whenever bytes arrive) and the one
 * consumer of `SampleSource.items()` (which pulls when it is ready). Sample blocks live in a fixed
 * pool of slots whose arrays are reused; a slot is freed when the consumer asks for the next item,
 * which is exactly the lifetime `SampleBlock` promises. When every slot is taken the consumer has
 * fallen behind: the frame is dropped, counted, and a gap is reported before the next block.
 */
import type { GapMarker, SampleBlock, SourceItem } from '../source.js';

class Slot {
  private bufs: Float32Array[] = [];
  private capacity = 0;
  private views: Float32Array[] = [];
  private viewLen = -1;
  private edges = new Float64Array(0);
  private delays = new Float64Array(0);

  /**
   * Copies the frame's samples and edges into this slot's arrays (grown only when a frame is
   * larger).
   */
  fill(
    startIndex: number,
    channels: readonly Float32Array[],
    tachEdges: Float64Array | undefined,
    arrivedMs?: number,
    channelDelays?: Float64Array,
  ): SampleBlock {
    const n = channels[0]!.length;
    if (n > this.capacity || channels.length !== this.bufs.length) {
      this.capacity = Math.max(n, this.capacity);
      this.bufs = channels.map(() => new Float32Array(this.capacity));
      this.viewLen = -1;
    }
    if (n !== this.viewLen) {
      this.views = this.bufs.map((b) => b.subarray(0, n));
      this.viewLen = n;
    }
    for (let c = 0; c < channels.length; c++) this.views[c]!.set(channels[c]!);
    let edges: Float64Array | undefined;
    if (tachEdges) {
      if (tachEdges.length > this.edges.length)
        this.edges = new Float64Array(Math.max(tachEdges.length, 2 * this.edges.length));
      this.edges.set(tachEdges);
      edges = this.edges.subarray(0, tachEdges.length);
    }
    let delays: Float64Array | undefined;
    if (channelDelays) {
      if (this.delays.length !== channelDelays.length)
        this.delays = new Float64Array(channelDelays.length);
      this.delays.set(channelDelays);
      delays = this.delays;
    }
    return {
      kind: 'samples',
      startIndex,
      channels: this.views,
      ...(edges ? { tachEdges: edges } : {}),
      ...(arrivedMs !== undefined ? { arrivedMs } : {}),
      ...(delays ? { channelDelays: delays } : {}),
    };
  }
}

interface Entry {
  readonly item: SourceItem;
  readonly slot: Slot | null;
}

export class BlockQueue {
  private readonly free: Slot[];
  private readonly entries: Entry[] = [];
  /** The slot of the block the consumer holds now; freed when it asks for the next item. */
  private held: Slot | null = null;
  /** One past the last sample index queued (blocks and gaps); null before the first. */
  private queuedEnd: number | null = null;
  private dropped = 0;
  private wake: (() => void) | null = null;
  private ended = false;

  overruns = 0;
  overrunSamples = 0;
  overrunGaps = 0;

  constructor(private readonly slots: number) {
    this.free = Array.from({ length: slots }, () => new Slot());
  }

  /** Queues a copy of a decoded frame, or drops it when the consumer is too far behind. */
  pushBlock(
    startIndex: number,
    channels: readonly Float32Array[],
    tachEdges: Float64Array | undefined,
    arrivedMs?: number,
    channelDelays?: Float64Array,
  ): boolean {
    const slot = this.free.pop();
    if (!slot) {
      this.overruns++;
      this.dropped++;
      return false;
    }
    this.fillGapTo(startIndex);
    this.entries.push({
      item: slot.fill(startIndex, channels, tachEdges, arrivedMs, channelDelays),
      slot,
    });
    this.queuedEnd = startIndex + channels[0]!.length;
    this.notify();
    return true;
  }

  pushGap(g: GapMarker): void {
    this.fillGapTo(g.fromIndex);
    this.entries.push({ item: g, slot: null });
    this.queuedEnd = g.toIndex;
    this.notify();
  }

  /** No more items after those queued. */
  end(): void {
    this.ended = true;
    this.notify();
  }

  /** Reports frames dropped for lack of a free slot as one gap, before whatever comes next. */
  private fillGapTo(index: number): void {
    if (this.queuedEnd !== null && index > this.queuedEnd) {
      const from = this.queuedEnd;
      this.overrunGaps++;
      this.overrunSamples += index - from;
      this.entries.push({
        item: {
          kind: 'gap',
          fromIndex: from,
          toIndex: index,
          reason:
            `the consumer fell behind: ${this.dropped} frame(s) ` +
            `dropped because all ${this.slots} queue slots were full`,
        },
        slot: null,
      });
    }
    this.dropped = 0;
  }

  private notify(): void {
    const w = this.wake;
    this.wake = null;
    w?.();
  }

  async *items(): AsyncGenerator<SourceItem> {
    try {
      for (;;) {
        if (this.held) {
          this.free.push(this.held);
          this.held = null;
        }
        const e = this.entries.shift();
        if (e) {
          this.held = e.slot;
          yield e.item;
          continue;
        }
        if (this.ended) return;
        await new Promise<void>((resolve) => {
          this.wake = resolve;
        });
      }
    } finally {
      if (this.held) {
        this.free.push(this.held);
        this.held = null;
      }
    }
  }
}
