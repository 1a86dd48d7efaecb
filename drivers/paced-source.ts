import { systemPacer, waitForSamples, type Pacer } from './pacer.js';
import type { SampleSource, SourceInfo, SourceItem } from './source.js';

/**
 * Hands out another source's blocks no faster than its sample rate (a recording replayed as if a
 * board were sampling it live). Gaps pass through at once; the clock counts from the first sample.
 */
export class PacedSource implements SampleSource {
  private sampleRate = 0;

  constructor(
    private readonly inner: SampleSource,
    private readonly pacer: Pacer = systemPacer,
  ) {}

  async open(): Promise<SourceInfo> {
    const info = await this.inner.open();
    this.sampleRate = info.sampleRate;
    return info;
  }

  async *items(): AsyncIterable<SourceItem> {
    if (this.sampleRate <= 0) throw new Error('PacedSource.items() called before open()');
    let t0 = 0;
    let first: number | undefined;
    for await (const item of this.inner.items()) {
      if (item.kind === 'samples') {
        if (first === undefined) {
          first = item.startIndex;
          t0 = this.pacer.now();
        }
        await waitForSamples(
          this.pacer,
          t0,
          item.startIndex + (item.channels[0]?.length ?? 0) - first,
          this.sampleRate,
        );
      }
      yield item;
    }
  }

  close(): Promise<void> {
    return this.inner.close();
  }
}
