import type { BoardSignal } from '../serial/board-emulator.js';
import { COUNT_RANGE, type SampleFormat } from '../serial/frame.js';
import type { SimPlan } from './scenario.js';
import type { FanSimulator } from './simulator.js';

/**
 * The simulated fan as the input signals of the serial board (`BoardSignal`), so the board emulator
 * can play the acquisition board with the simulator's physics behind it.
 *
 * - The board may have more inputs than the channel map uses (`channelCount` above the
 *   simulator's): the extra inputs read 0 V. It may also have fewer, when it times the tach itself
 *   and does not
 *   digitise it: channels from `channelCount` up are not sent (the caller checks no sensor is
 *   lost).
 * - The simulator reports a tach edge with the sample after it, so an edge falling between the last
 *   sample of one frame and the first of the next would arrive one frame late. This signal renders
 *   one sample ahead and keeps it back for the next call, so every edge lands in the frame whose
 *   samples span it, as the protocol wants.
 * - The fan keeps turning whatever the board does: when the board skips samples (a lost frame) the
 *   simulator runs on through them, and when the board's clock restarts at 0 the simulation
 *   continues where it was, only the board's sample numbers start again.
 */
export class SimBoardSignal implements BoardSignal {
  readonly channelCount: number;
  private readonly simChannels: number;
  /** Channels copied from the simulator into the board's. */
  private readonly copied: number;
  /** Rendered samples; index 0 holds the sample kept back from the previous call. */
  private readonly scratch: Float32Array[];
  private readonly chunk: number;
  /** Board sample index of the kept-back sample (the next one fill() hands out). */
  private nextBoard = 0;
  /** Simulator sample index minus board sample index. */
  private shift = 0;
  private started = false;

  constructor(
    private readonly sim: FanSimulator,
    opts: { readonly channelCount?: number; readonly maxBlock?: number } = {},
  ) {
    this.simChannels = sim.channelCount;
    this.channelCount = opts.channelCount ?? sim.channelCount;
    if (!Number.isInteger(this.channelCount) || this.channelCount < 1)
      throw new RangeError(`board channel count ${this.channelCount} is not a positive integer`);
    this.copied = Math.min(this.simChannels, this.channelCount);
    this.chunk = opts.maxBlock ?? 4096;
    this.scratch = Array.from({ length: this.simChannels }, () => new Float32Array(this.chunk + 1));
    this.shift = sim.sampleIndex;
    // Sample 0 of the board; an edge reported with it would lie before the board's first sample.
    sim.render(this.scratch, 1);
  }

  fill(first: number, n: number, out: readonly Float64Array[], edges: Float64Array): number {
    if (!this.started) {
      // The board's clock may start anywhere: its first sample is the simulator's next one.
      this.started = true;
      this.shift -= first;
      this.nextBoard = first;
    } else if (first < this.nextBoard) {
      // The board's clock restarted: the simulation goes on from where it is.
      this.shift += this.nextBoard - first;
      this.nextBoard = first;
    }
    for (let skip = first - this.nextBoard; skip > 0;) {
      const k = Math.min(skip, this.chunk);
      this.advance(k, null, 0, null, 0);
      skip -= k;
    }
    for (let c = this.copied; c < this.channelCount; c++) out[c]!.fill(0, 0, n);
    let edgeCount = 0;
    for (let done = 0; done < n;) {
      const k = Math.min(n - done, this.chunk);
      edgeCount = this.advance(k, out, done, edges, edgeCount);
      done += k;
    }
    return edgeCount;
  }

  /**
   * Hands out the next k board samples (into `out` from `outOffset` when given) and their tach
   * edges (board sample indices, into `edges` from `edgeCount` as room allows); returns the new
   * edge count.
   */
  private advance(
    k: number,
    out: readonly Float64Array[] | null,
    outOffset: number,
    edges: Float64Array | null,
    edgeCount: number,
  ): number {
    const s = this.scratch;
    const found = this.sim.render(s, k, 1);
    if (out) {
      for (let c = 0; c < this.copied; c++) {
        const src = s[c]!;
        const dst = out[c]!;
        for (let i = 0; i < k; i++) dst[outOffset + i] = src[i]!;
      }
    }
    if (edges) {
      const simEdges = this.sim.edges;
      for (let e = 0; e < found && edgeCount < edges.length; e++)
        edges[edgeCount++] = simEdges[e]! - this.shift;
    }
    for (let c = 0; c < this.simChannels; c++) s[c]![0] = s[c]![k]!;
    this.nextBoard += k;
    return edgeCount;
  }
}

/**
 * Volts per count of each board channel for `format`: the input range of a sensor channel is its
 * `full_scale_v` from the config, else the IEPE supply (an open cable reads just below it); the
 * tach channel's covers its high level with a quarter to spare; an unused input gets 10 V. Float32
 * frames carry volts (1 V per count).
 */
export function boardScales(plan: SimPlan, channelCount: number, format: SampleFormat): number[] {
  const range = new Array<number>(channelCount).fill(10);
  for (const s of plan.sensors)
    if (s.channel < channelCount) range[s.channel] = s.full_scale_v ?? plan.supplyV;
  if (plan.tach.channel < channelCount)
    range[plan.tach.channel] =
      1.25 * Math.max(Math.abs(plan.tach.high_v), Math.abs(plan.tach.low_v));
  return format === 'float32'
    ? range.map(() => 1)
    : range.map((r) => r / (COUNT_RANGE[format].max + 1));
}
