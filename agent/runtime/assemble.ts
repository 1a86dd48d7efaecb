/**
 * The one place the agent is put together: from a loaded config and the hardware factories of the
 * caller (the board's GPIO and source for `turnwise run`, lines in memory and the simulator for
 * `turnwise demo`), it builds the Agent (source -> DSP -> watcher -> outputs), the live server when
 * the config has a `live` section, and the links between them:
 *
 *   agent windows   -> live page (overall values, trend) and the watcher's status after each window
 *   agent live 1x   -> live page (polar plots, balancing captures)
 *   workbench events -> agent.queueEvent (the outbox and MQTT, like the watcher's own events)
 *   finished job    -> agent.watcher.reloadCoefficients() (the balance forecast uses them at once)
 *   MQTT balancing.session -> the workbench
 *
 * Nothing is started here: `agent.run()` opens the outputs and samples, `startLive()` listens.
 */
import type { StoredSweep } from '../sweep/store.js';
import type { GpioLines } from '../../drivers/gpio/types.js';
import type { SampleSource } from '../../drivers/source.js';
import type { Clock } from '../clock.js';
import type { Config } from '../config/schema.js';
import type { WindowResult } from '../dsp/types.js';
import type { AgentEvent } from '../events.js';
import { LiveServer } from '../live/server.js';
import type { Logger } from '../log.js';
import { Agent } from './agent.js';

/** The hardware behind the agent, opened by the caller's own means. */
export interface AssemblyFactories {
  /** GPIO lines for the advisory and the GPIO tach input (undefined when the config uses none). */
  readonly openGpio: (cfg: Config) => Promise<GpioLines | undefined> | GpioLines | undefined;
  /** The sample source of the config, and whether the board times the tach itself. */
  readonly openSource: (cfg: Config) => {
    readonly source: SampleSource;
    readonly boardTimesTach: boolean;
  };
}

export interface AssemblyOptions extends AssemblyFactories {
  readonly config: Config;
  readonly clock: Clock;
  readonly logger: Logger;
  /**
   * Where secrets named in the config are looked up (live tokens, MQTT credentials); default
   * process.env.
   */
  readonly env?: NodeJS.ProcessEnv;
  readonly agentVersion?: string;
  /** Wall-clock time of sample 0 (simulations that start on a given day), ms. */
  readonly startMs?: number;
  /** Calendar seconds per second of samples (a simulation's time_scale). */
  readonly timeScale?: number;
  /** Called once the outputs are open and sampling starts (systemd READY). */
  readonly onStarted?: () => void;
  /** Receives every event as it is queued. */
  readonly onEvent?: (e: AgentEvent) => void;
  /** Told of each closed window before the live page (the service watchdog, the last-good copy). */
  readonly onWindow?: (w: WindowResult, atMs: number) => void;
}

export interface Assembly {
  readonly agent: Agent;
  /** The live page's server; null when the config has no `live` section. */
  readonly live: LiveServer | null;
  /**
   * Listens for the page when there is one; resolves with its URL (null without a live section).
   */
  startLive(): Promise<string | null>;
  /** Closes the page's connections and stops listening (nothing to do without one). */
  stopLive(): Promise<void>;
}

/**
 * Builds the agent, the live server and their links. UserError when the live tokens are unusable.
 */
export async function assemble(o: AssemblyOptions): Promise<Assembly> {
  const cfg = o.config;
  const gpio = await o.openGpio(cfg);
  const { source, boardTimesTach } = o.openSource(cfg);
  // The agent is built after the server, which needs it only once events and jobs happen.
  let agent: Agent | null = null;
  const theAgent = (): Agent => {
    if (!agent) throw new Error('the live page used the agent before it was built');
    return agent;
  };
  const live = cfg.live
    ? LiveServer.fromConfig(
        cfg,
        {
          logger: o.logger,
          clock: o.clock,
          emit: (e) => theAgent().queueEvent(e),
          onCoefficientsSaved: () => theAgent().watcher.reloadCoefficients(),
          sweepLive: () => agent?.sweepRecorder?.live() ?? null,
          sweepEvidence: () => agent?.sweepRecorder?.evidence() ?? null,
        },
        o.env,
      )
    : null;
  const built: Agent = new Agent({
    config: cfg,
    source,
    boardTimesTach,
    clock: o.clock,
    logger: o.logger,
    ...(gpio ? { gpio } : {}),
    ...(o.env ? { env: o.env } : {}),
    agentVersion: o.agentVersion,
    startMs: o.startMs,
    timeScale: o.timeScale,
    windowConsumers: [
      {
        onWindow: (w, at) => {
          o.onWindow?.(w, at);
          if (live) {
            live.onWindow(w, at);
            if (built.status) live.onWatch(built.status);
          }
        },
      },
    ],
    liveConsumers: live ? [live] : [],
    onEvent: o.onEvent,
    ...(live ? { onSweep: (s: StoredSweep) => live.onSweep(s) } : {}),
    onStarted: o.onStarted,
  });
  agent = built;
  if (live) built.handlers.balancingSession = (a) => live.workbench.sessionCommand(a);
  return {
    agent: built,
    live,
    async startLive() {
      if (!live) return null;
      return (await live.start()).url;
    },
    async stopLive() {
      await live?.stop();
    },
  };
}
