import type { Config } from '../../agent/config/schema.js';
import type { SimDriverConfig } from '../../agent/config/sim.js';
import { systemPacer, waitForSamples, type Pacer } from '../pacer.js';
import type { SampleSource, SourceInfo, SourceItem } from '../source.js';
import { loadScenario, resolveScenario, scenarioPathFromConfig, type SimPlan } from './scenario.js';
import { FanSimulator, type OrderVectorModel } from './simulator.js';
import type { AppliedEvent, WeightOnRotor } from './state.js';

/**
 * The simulated fan as an acquisition source (`driver: sim`): yields blocks of volts in the board's
 * channel map, paced in real time (like a board) or as fast as the consumer takes them.
 */

export type { Pacer } from '../pacer.js';

export interface SimSourceOptions {
  /** Scenario time to start at, seconds from day 0. */
  readonly startS?: number;
  /** Scenario seconds per signal second. */
  readonly timeScale?: number;
  readonly seed?: number;
  /** Samples per channel in each block. */
  readonly blockSamples: number;
  /** 'realtime': a block is handed out when a board would have finished it; 'fast': at once. */
  readonly pace: 'realtime' | 'fast';
  /** Also hand out the tach edge times, as a board that times its own tach input would. */
  readonly boardTachEdges?: boolean;
  /** Stop after this many samples per channel (endless when omitted). */
  readonly totalSamples?: number;
  readonly pacer?: Pacer;
  readonly onEvent?: (e: AppliedEvent) => void;
  /** Description shown in logs. */
  readonly description?: string;
}

export class SimSource implements SampleSource {
  private readonly sim: FanSimulator;
  private readonly opts: SimSourceOptions;
  private readonly pacer: Pacer;
  private readonly channels: Float32Array[];
  private closed = false;
  private opened = false;

  constructor(plan: SimPlan, opts: SimSourceOptions) {
    if (!Number.isInteger(opts.blockSamples) || opts.blockSamples < 1)
      throw new Error(`blockSamples must be a positive integer, got ${opts.blockSamples}`);
    this.opts = opts;
    this.pacer = opts.pacer ?? systemPacer;
    this.sim = new FanSimulator(plan, {
      startS: opts.startS,
      timeScale: opts.timeScale,
      seed: opts.seed,
      onEvent: opts.onEvent,
    });
    this.channels = Array.from(
      { length: plan.channelCount },
      () => new Float32Array(opts.blockSamples),
    );
  }

  async open(): Promise<SourceInfo> {
    this.opened = true;
    const info: SourceInfo = {
      sampleRate: this.sim.sampleRate,
      channelCount: this.sim.channelCount,
      description: this.opts.description ?? `simulated fan: ${this.sim.plan.name}`,
    };
    return this.opts.totalSamples === undefined
      ? info
      : { ...info, totalSamples: this.opts.totalSamples };
  }

  async *items(): AsyncIterable<SourceItem> {
    if (!this.opened) throw new Error('SimSource.items() called before open()');
    const fs = this.sim.sampleRate;
    const t0 = this.pacer.now();
    const first = this.sim.sampleIndex;
    while (!this.closed) {
      const startIndex = this.sim.sampleIndex;
      const left =
        this.opts.totalSamples === undefined
          ? Infinity
          : first + this.opts.totalSamples - startIndex;
      if (left <= 0) return;
      const n = Math.min(this.opts.blockSamples, left);
      this.sim.render(this.channels, n);
      if (this.opts.pace === 'realtime') {
        await waitForSamples(this.pacer, t0, startIndex + n - first, fs);
      } else {
        await new Promise<void>((resolve) => setImmediate(resolve));
      }
      if (this.closed) return;
      const channels =
        n === this.opts.blockSamples ? this.channels : this.channels.map((c) => c.subarray(0, n));
      yield this.opts.boardTachEdges
        ? { kind: 'samples', startIndex, channels, tachEdges: this.sim.edges }
        : { kind: 'samples', startIndex, channels };
    }
  }

  async close(): Promise<void> {
    this.closed = true;
  }

  /**
   * Fits a balance weight on the running simulated fan (trial or correction weight of a balancing
   * job); the 1x vectors move from the next 10 ms on.
   */
  addWeight(w: WeightOnRotor): void {
    this.sim.state.addWeight(w);
  }

  /** Takes a weight off; false when no weight has that id. */
  removeWeight(id: string): boolean {
    return this.sim.state.removeWeight(id);
  }

  weights(): WeightOnRotor[] {
    return this.sim.state.weights();
  }

  /**
   * The model's steady-state velocity vectors of one order at every sensor now (for checks and
   * demos).
   */
  modelOrder(order = 1): OrderVectorModel[] {
    return this.sim.modelOrder(order);
  }

  get speedRpm(): number {
    return this.sim.speedRpm;
  }

  get scenarioTimeS(): number {
    return this.sim.scenarioTimeS;
  }
}

/**
 * Builds the `driver: sim` source from the config's acquisition section; the scenario path is
 * relative to the config file.
 */
export function createSimSource(
  cfg: Config,
  section: SimDriverConfig,
  configFile: string,
  extra: { pacer?: Pacer; onEvent?: (e: AppliedEvent) => void } = {},
): SimSource {
  const file = scenarioPathFromConfig(configFile, section.scenario);
  const plan = resolveScenario(loadScenario(file), cfg, file, configFile);
  return new SimSource(plan, {
    startS: section.from_day * 86400,
    timeScale: section.time_scale,
    seed: section.seed,
    blockSamples: Math.max(1, Math.round((section.block_ms / 1000) * plan.sampleRate)),
    pace: section.pace,
    boardTachEdges: section.board_tach_edges,
    description: `simulated fan (${file})`,
    ...extra,
  });
}
