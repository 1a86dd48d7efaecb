import type { SampleSource, SourceInfo, SourceItem } from '../../drivers/source.js';

/** A source over arrays in memory, with optional gaps (drop samples [from, to)). For tests. */
export class ArraySource implements SampleSource {
  constructor(
    private readonly channels: Float32Array[],
    private readonly sampleRate: number,
    private readonly block = 4096,
    private readonly gaps: ReadonlyArray<readonly [number, number]> = [],
    /** Wall-clock pause after each block, ms (0 = as fast as possible). */
    private readonly paceMs = 0,
  ) {}
  async open(): Promise<SourceInfo> {
    return {
      sampleRate: this.sampleRate,
      channelCount: this.channels.length,
      description: 'memory',
      totalSamples: this.channels[0]!.length,
    };
  }
  async *items(): AsyncIterable<SourceItem> {
    const n = this.channels[0]!.length;
    for (let i = 0; i < n;) {
      const gap = this.gaps.find(([a]) => a === i);
      if (gap) {
        yield { kind: 'gap', fromIndex: gap[0], toIndex: gap[1], reason: 'test gap' };
        i = gap[1];
        continue;
      }
      const nextGap = Math.min(...this.gaps.map(([a]) => a).filter((a) => a > i), n);
      const e = Math.min(nextGap, i + this.block);
      yield {
        kind: 'samples',
        startIndex: i,
        channels: this.channels.map((c) => c.subarray(i, e)),
      };
      i = e;
      if (this.paceMs > 0) await new Promise((r) => setTimeout(r, this.paceMs));
    }
  }
  async close(): Promise<void> {}
}
