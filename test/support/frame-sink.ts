import type { DecodedFrame, DecodeProblem, FrameSink } from '../../drivers/serial/frame.js';
import type { GapMarker } from '../../drivers/source.js';

export interface CopiedFrame {
  readonly sequence: number;
  readonly startIndex: number;
  readonly boardFirstSample: number;
  readonly sampleRateHz: number;
  readonly channels: number[][];
  readonly tachEdges: number[] | undefined;
  readonly channelDelays: number[] | undefined;
}

export type Recorded = { kind: 'frame'; frame: CopiedFrame } | { kind: 'gap'; gap: GapMarker };

/** A FrameSink that copies everything it is given (the decoder reuses its arrays). */
export class RecordingSink implements FrameSink {
  readonly items: Recorded[] = [];
  readonly problems: { kind: DecodeProblem; detail: string }[] = [];

  frame(f: DecodedFrame): void {
    this.items.push({
      kind: 'frame',
      frame: {
        sequence: f.sequence,
        startIndex: f.startIndex,
        boardFirstSample: f.boardFirstSample,
        sampleRateHz: f.sampleRateHz,
        channels: f.channels.map((c) => Array.from(c)),
        tachEdges: f.tachEdges ? Array.from(f.tachEdges) : undefined,
        channelDelays: f.channelDelays ? Array.from(f.channelDelays) : undefined,
      },
    });
  }

  gap(g: GapMarker): void {
    this.items.push({ kind: 'gap', gap: g });
  }

  problem(kind: DecodeProblem, detail: string): void {
    this.problems.push({ kind, detail });
  }

  get frames(): CopiedFrame[] {
    return this.items.flatMap((i) => (i.kind === 'frame' ? [i.frame] : []));
  }

  get gaps(): GapMarker[] {
    return this.items.flatMap((i) => (i.kind === 'gap' ? [i.gap] : []));
  }
}
