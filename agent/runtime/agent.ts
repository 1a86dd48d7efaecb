import { join } from 'node:path';
import type { GpioLines } from '../../drivers/gpio/types.js';
import type { SampleSource } from '../../drivers/source.js';
import { advisorySettings, SafeStopAdvisory } from '../advisory/advisory.js';
import type { AdvisoryChannelInput } from '../advisory/input.js';
import { LatchFile } from '../advisory/latch-file.js';
import { ManualClock, type Clock } from '../clock.js';
import type { Config } from '../config/schema.js';
import type { LiveFrame, WindowResult } from '../dsp/types.js';
import type { AgentEvent } from '../events.js';
import type { Logger } from '../log.js';
import { UserError } from '../errors.js';
import { EventLog } from '../eventlog/event-log.js';
import type { CommandHandlers } from '../mqtt/commands.js';
import { livePayloadFromFrame, type ChannelVerdict } from '../mqtt/live.js';
import { openPlantLink, type PlantLink } from '../mqtt/plant-link.js';
import { metricValues } from '../mqtt/sparkplug/metrics.js';
import { openWatcher, type Watcher, type WatchStatus } from '../watcher/index.js';
import { EventCapturer } from '../capture/event-capture.js';
import { SweepRecorder } from '../sweep/recorder.js';
import type { StoredSweep } from '../sweep/store.js';
import { GpioSpeedCheck } from './gpio-speed-check.js';
import {
  AgentRuntime,
  type LiveConsumer,
  type RunSummary,
  type WindowConsumer,
} from './runtime.js';

/**
 * `turnwise run` wired: source -> DSP -> watcher -> outputs (durable outbox and MQTT, local
 * advisory, live consumers such as the technician's page). Every part is injected or built from
 * the config; nothing here waits on the network on the sampling path.
 */
export interface AgentOptions {
  readonly config: Config;
  readonly source: SampleSource;
  readonly boardTimesTach: boolean;
  readonly clock: Clock;
  readonly logger: Logger;
  /**
   * GPIO lines for the advisory and the GPIO tach input; required when the config has `advisory` or
   * `gpio.tach_speed`.
   */
  readonly gpio?: GpioLines;
  /** Further consumers (the live page). */
  readonly windowConsumers?: readonly WindowConsumer[];
  readonly liveConsumers?: readonly LiveConsumer[];
  /** Receives every event as it is queued (the live page shows them). */
  readonly onEvent?: (e: AgentEvent) => void;
  readonly agentVersion?: string;
  readonly env?: NodeJS.ProcessEnv;
  /** Wall-clock time of sample 0 (simulations that start on a given day), ms. */
  readonly startMs?: number;
  /** Calendar seconds per second of samples (a simulation's time_scale); event times follow it. */
  readonly timeScale?: number;
  /** Told of every recorded sweep once it is stored (the live page). */
  readonly onSweep?: (s: StoredSweep) => void;
  /** Called once the outputs are open and sampling starts (systemd READY). */
  readonly onStarted?: () => void;
}

export interface AgentSummary extends RunSummary {
  readonly events: number;
  /** False when the outbox still held events at exit (they stay on disk for the next start). */
  readonly drained: boolean;
  /** Events that were only in memory (disk failure) and were lost at exit. */
  readonly lostInMemory: number;
}

export class Agent {
  readonly watcher: Watcher;
  readonly handlers: CommandHandlers = {};
  private link: PlantLink | null = null;
  private readonly eventLog: EventLog | null;
  private advisory: SafeStopAdvisory | null = null;
  private gpioSpeed: GpioSpeedCheck | null = null;
  private runtime: AgentRuntime | null = null;
  private capturer: EventCapturer | null = null;
  private sweeps: SweepRecorder | null = null;
  private lastWindow: WindowResult | null = null;
  private lastStatus: WatchStatus | null = null;
  private events = 0;
  private readonly early: AgentEvent[] = [];
  /**
   * The watcher's clock follows the sample clock, so events carry the time their data was measured.
   */
  private readonly dataClock: ManualClock;

  constructor(private readonly o: AgentOptions) {
    this.dataClock = new ManualClock(o.startMs ?? o.clock.now());
    // A state directory that is full or holds damaged files does not stop the agent: the watcher
    // logs such trouble itself (once per burst) and lists it in status.warnings.
    this.watcher = openWatcher(o.config, this.dataClock, o.logger);
    const el = o.config.event_log;
    this.eventLog = el.enabled
      ? new EventLog({
          stateDir: o.config.state_dir,
          maxBytes: Math.round(el.max_mb * 1024 * 1024),
          log: o.logger,
        })
      : null;
  }

  get status(): WatchStatus | null {
    return this.lastStatus;
  }

  /** The run-up and coast-down recorder (null until sampling starts). */
  get sweepRecorder(): SweepRecorder | null {
    return this.sweeps;
  }

  /** Queues an event from another part (the live page, the agent itself) like the watcher's own. */
  queueEvent(e: AgentEvent): void {
    this.emit(e);
  }

  private emit(event: AgentEvent): void {
    // Every alarm keeps the raw signal around it; the event names the capture.
    const captureId =
      event.severity === 'alarm' ? (this.capturer?.trigger(event.type, event.id) ?? null) : null;
    const e: AgentEvent = captureId ? { ...event, capture_id: captureId } : event;
    this.events++;
    this.eventLog?.append(e);
    this.o.onEvent?.(e);
    if (this.link) void this.link.queueEvent(e);
    else if (this.o.config.mqtt) this.early.push(e); // queued as soon as the outbox is open
  }

  private verdict = (id: string): ChannelVerdict | undefined => {
    const latest = this.lastStatus?.latest;
    if (!latest) return undefined;
    const z = latest.zone.inhibited ? null : (latest.zone.channels[id]?.zone ?? null);
    return {
      zone: z === 'A' || z === 'B' || z === 'C' || z === 'D' ? z : null,
      ok: latest.sensors.find((s) => s.id === id)?.ok ?? null,
    };
  };

  private onWindow(w: WindowResult, atMs: number): void {
    const cfg = this.o.config;
    this.dataClock.set(atMs);
    const { events, status } = this.watcher.process(w);
    this.lastWindow = w;
    this.lastStatus = status;
    for (const e of events) this.emit(e);
    if (this.sweeps) {
      const before = this.sweeps.lastSweep;
      this.sweeps.onWindow(w);
      // The last sweep is evidence for the watcher from the next window on.
      if (this.sweeps.lastSweep !== before) this.watcher.setSweepEvidence(this.sweeps.evidence());
    }
    this.gpioSpeed?.onWindow(w);
    if (this.advisory) {
      const channels: AdvisoryChannelInput[] = cfg.sensors.map((s) => {
        const v = this.verdict(s.id);
        return { id: s.id, bearing: s.bearing, zone: v?.zone ?? null, ok: v?.ok ?? false };
      });
      this.advisory.update({ t_ms: (w.end_index / w.sample_rate_hz) * 1000, channels });
    }
    if (this.link?.sparkplug) {
      const a = this.advisory?.health();
      const adv = a
        ? {
            state: typeof a.advisory_state === 'string' ? a.advisory_state : null,
            energised:
              typeof a.advisory_outputs_energised === 'boolean'
                ? a.advisory_outputs_energised
                : null,
          }
        : null;
      this.link.updateSparkplug(metricValues(cfg.sensors, w, status, adv));
    }
  }

  private onLive(f: LiveFrame, atMs: number): void {
    const cfg = this.o.config;
    this.link?.publishLive(() =>
      livePayloadFromFrame(
        f,
        cfg.sensors,
        this.lastWindow,
        cfg.machine.id,
        new Date(atMs).toISOString(),
        this.verdict,
      ),
    );
  }

  /**
   * The `agent` part of the heartbeat: counts of this run, the last window's revolutions, the
   * source's own health counters (prefixed source_), the GPIO speed cross-check and the advisory.
   */
  health(): Record<string, number | string | boolean | null> {
    const c = this.runtime?.counts();
    const w = this.lastWindow;
    const source: Record<string, number | string | boolean | null> = {};
    for (const [k, v] of Object.entries(this.o.source.health?.() ?? {})) source[`source_${k}`] = v;
    return {
      windows: c?.windows ?? 0,
      gaps: c?.gaps ?? 0,
      events: this.events,
      last_window_revolutions: w?.revolutions ?? null,
      last_window_revolutions_rejected: w?.revolutions_rejected ?? null,
      last_window_speed_rpm: w?.speed_rpm == null ? null : Math.round(w.speed_rpm * 10) / 10,
      ...source,
      ...(this.runtime?.timeHealth() ?? {}),
      ...(this.gpioSpeed?.health() ?? {}),
      ...(this.advisory?.health() ?? {}),
      ...(this.sweeps
        ? {
            sweeps_recorded: this.sweeps.recorded,
            sweeps_failed: this.sweeps.failed,
            sweeps_removed: this.sweeps.removed,
          }
        : {}),
      ...(this.capturer
        ? {
            captures_written: this.capturer.written,
            captures_failed: this.capturer.failed,
            captures_removed: this.capturer.removed,
          }
        : {}),
      ...(this.eventLog?.health() ?? {}),
      ...this.linkHealth(),
    };
  }

  /**
   * MQTT session facts for the heartbeat: protocol level, refusals, stuck clients, and the
   * Sparkplug node's state.
   */
  private linkHealth(): Record<string, number | boolean | null> {
    if (!this.link) return {};
    const i = this.link.publisher.linkInfo();
    const out: Record<string, number | boolean | null> = {
      mqtt_protocol_version: i.protocol_version,
      mqtt_refused_too_large_total: i.refused_too_large_total,
      mqtt_stuck_replaced_total: i.stuck_replaced_total,
    };
    const sp = this.link.sparkplug?.health();
    if (sp) {
      Object.assign(out, {
        sparkplug_connected: sp.connected,
        sparkplug_born: sp.born,
        sparkplug_primary_host_online: sp.primary_host_online,
        sparkplug_bdseq: sp.bdseq,
        sparkplug_births_total: sp.births_total,
        sparkplug_events_sent_total: sp.events_sent_total,
        sparkplug_commands_refused_total: sp.commands_refused_total,
      });
    }
    return out;
  }

  /**
   * Opens outputs, runs until the source ends or stop(), then drains the outbox for at most
   * `drainMs`.
   */
  async run(drainMs = 5000): Promise<AgentSummary> {
    const cfg = this.o.config;
    const log = this.o.logger;
    const h = this.handlers;
    h.startBaseline = () => {
      this.watcher.startLearning();
      return { learning: true };
    };
    h.stopBaseline = () => {
      const r = this.watcher.stopLearning();
      return { baseline_channels: Object.keys(r.baseline.channels), left_out: r.left_out };
    };
    h.takeSnapshot = () => ({ window: this.lastWindow, status: this.lastStatus });
    h.takeCapture = () => {
      const id = this.capturer?.trigger('command') ?? null;
      if (!id)
        throw new UserError(
          'capture.take',
          cfg.capture.enabled
            ? 'sampling has not started yet'
            : 'captures are off (capture.enabled: false)',
          cfg.capture.enabled
            ? 'send it again in a few seconds'
            : 'set capture.enabled: true in the config',
        );
      return { capture_id: id, ready_after_s: cfg.capture.post_s };
    };
    if (cfg.mqtt) {
      this.link = await openPlantLink({
        mqtt: cfg.mqtt,
        asset: cfg.machine.id,
        stateDir: cfg.state_dir,
        log,
        handlers: h,
        env: this.o.env,
        agentVersion: this.o.agentVersion,
        health: () => this.health(),
        sensors: cfg.sensors,
      });
      for (const e of this.early.splice(0)) void this.link.queueEvent(e);
    }
    let summary: RunSummary;
    try {
      // Opened before the advisory energises its outputs, so a refused input line leaves them
      // untouched.
      if (cfg.gpio?.tach_speed) {
        if (!this.o.gpio)
          throw new Error('gpio.tach_speed configured but no GPIO lines were given');
        // Speed cross-check only: GPIO edges are timed by the wall clock, far too coarsely for
        // phase.
        this.gpioSpeed = await GpioSpeedCheck.open({
          config: cfg.gpio.tach_speed,
          tach: cfg.tach,
          gpio: this.o.gpio,
          log,
          nowMs: () => this.o.clock.now(),
        });
      }
      if (cfg.advisory) {
        if (!this.o.gpio) throw new Error('advisory configured but no GPIO lines were given');
        this.advisory = await SafeStopAdvisory.start({
          settings: advisorySettings(cfg.advisory, cfg.sensors),
          gpio: this.o.gpio,
          asset: cfg.machine.id,
          emit: (e) => this.emit(e),
          store: new LatchFile(join(cfg.state_dir, 'advisory.json')),
          log,
          // The stall watchdog needs the wall clock: a stalled source stops the sample clock too.
          now: () => this.o.clock.now(),
          // Events carry the time of the measurement that caused them, as the watcher's do.
          measuredNow: () => this.dataClock.now(),
        });
        h.acknowledgeAdvisory = (a) => ({ ...this.advisory!.acknowledge(`mqtt: ${a.by}`) });
      }
      const w = cfg.watcher;
      this.runtime = new AgentRuntime({
        config: cfg,
        source: this.o.source,
        clock: this.o.clock,
        logger: log,
        windowSeconds: w.window_s,
        // The page and the live topic update at least once a second.
        liveSeconds: 0.5,
        boardTimesTach: this.o.boardTimesTach,
        rawTap: (info, timeOf, maxBlock) => {
          this.capturer = new EventCapturer({
            config: cfg,
            sampleRate: info.sampleRate,
            channelCount: info.channelCount,
            maxBlock,
            log,
            timeOf,
            nowMs: () => this.o.clock.now(),
          });
          return this.capturer;
        },
        revolutionTap: (info, timeOf) => {
          this.sweeps = new SweepRecorder({
            config: cfg,
            sampleRate: info.sampleRate,
            log,
            timeOf,
            nowMs: () => this.o.clock.now(),
            emit: (e) => this.emit(e),
            onStored: this.o.onSweep,
          });
          this.watcher.setSweepEvidence(this.sweeps.evidence());
          return this.sweeps.points;
        },
        startMs: this.o.startMs,
        timeScale: this.o.timeScale,
        windowConsumers: [
          { onWindow: (win, at) => this.onWindow(win, at) },
          ...(this.o.windowConsumers ?? []),
        ],
        liveConsumers: [{ onLive: (f, at) => this.onLive(f, at) }, ...(this.o.liveConsumers ?? [])],
      });
      this.o.onStarted?.();
      summary = await this.runtime.run();
      // A sweep still going at the stop is recorded as far as it got.
      await this.sweeps?.close(this.lastWindow?.end_index ?? 0);
    } catch (e) {
      // Failed to start or to go on: let go of the broker connection so a retry (or the fallback
      // to the last good config) does not meet this one under the same client id.
      await this.link?.close();
      this.link = null;
      throw e;
    } finally {
      await this.advisory?.close();
      await this.gpioSpeed?.close();
      this.eventLog?.close();
    }
    let drained = true;
    let lost = 0;
    if (this.link) {
      drained = await this.link.drain(drainMs);
      if (!drained)
        log.warn(
          { pending: this.link.outbox.size },
          'events not yet delivered stay on disk and go out at the next start',
        );
      lost = await this.link.close();
    }
    return { ...summary, events: this.events, drained, lostInMemory: lost };
  }

  stop(): void {
    this.runtime?.stop();
  }
}
