import { randomUUID } from 'node:crypto';
import type { AdvisoryConfig } from '../config/advisory.js';
import type { SensorConfig } from '../config/schema.js';
import { UserError } from '../errors.js';
import type { AgentEvent } from '../events.js';
import type { DigitalInput, DigitalOutput, GpioLines } from '../../drivers/gpio/types.js';
import type { Logger } from '../log.js';
import type { AdvisoryInput } from './input.js';
import type { LatchRecord, LatchStore } from './latch-file.js';
import { countVotes, type Vote, type VoteSettings } from './vote.js';
import { advisoryOutputs } from './release.js';

/**
 * Local safe-stop ADVISORY: a relay and a lamp that tell the people at the fan it should be stopped
 * safely. It is an advisory to people, not a protective trip; it does not replace the plant's
 * machinery protection system, and wiring it into a trip circuit is for the plant's qualified
 * engineers under local codes and licensed practice.
 *
 * Fail-safe: both outputs are energised while all is well. An orderly stop, a stall or a lost board
 * drops them here; after the agent is killed or crashes, systemd drops them from outside
 * (release.ts, `turnwise outputs-off`, ExecStopPost), since a GPIO line keeps its level when the
 * process that drove it dies. Raised when `minChannels` OK channels of one bearing sit at or above
 * the configured zone for `holdMs` (channels that are not OK never vote); latched until
 * acknowledged by the local button or an authorised command; the latch survives a restart. Every
 * change is an event.
 *
 *   normal --vote held--> raised --ack--> acknowledged --vote gone, held--> normal
 *                           |                                  ^
 *                           +--vote gone, held--> latched --ack+
 *   latched --vote held--> raised
 */

export type AdvisoryState = LatchRecord['state'];

export interface AdvisorySettings {
  readonly relay?: { readonly line: number; readonly activeLow: boolean };
  readonly lamp?: { readonly line: number; readonly activeLow: boolean };
  readonly button?: {
    readonly line: number;
    readonly activeLow: boolean;
    readonly debounceMs: number;
  };
  readonly vote: VoteSettings;
  readonly holdMs: number;
  /** Drop the outputs when no input arrives for this long (wall clock), ms; 0 = never. */
  readonly stallMs: number;
}

/**
 * Checks the `advisory` section against the sensors and turns it into settings. Throws UserError.
 */
export function advisorySettings(
  cfg: AdvisoryConfig,
  sensors: readonly SensorConfig[],
): AdvisorySettings {
  const known = new Set(sensors.map((s) => s.id));
  cfg.sensors?.forEach((id, i) => {
    if (!known.has(id))
      throw new UserError(
        `advisory.sensors[${i}]`,
        `no sensor has id "${id}"`,
        `use ids from sensors[]: ${[...known].join(', ')}`,
      );
  });
  return {
    relay: cfg.relay && { line: cfg.relay.line, activeLow: cfg.relay.active_low },
    lamp: cfg.lamp && { line: cfg.lamp.line, activeLow: cfg.lamp.active_low },
    button: cfg.ack_button && {
      line: cfg.ack_button.line,
      activeLow: cfg.ack_button.active_low,
      debounceMs: cfg.ack_button.debounce_ms,
    },
    vote: {
      zone: cfg.zone,
      minChannels: cfg.min_channels,
      voters: cfg.sensors ? new Set(cfg.sensors) : null,
    },
    holdMs: cfg.hold_s * 1000,
    stallMs: cfg.stall_s * 1000,
  };
}

export interface AdvisoryOptions {
  readonly settings: AdvisorySettings;
  readonly gpio: GpioLines;
  readonly asset: string;
  /** Receives every advisory event (route it to the outbox). */
  readonly emit: (event: AgentEvent) => void;
  readonly store: LatchStore;
  readonly log: Logger;
  /** Wall clock, ms: the stall check (a stalled source stops the sample clock too). */
  readonly now?: () => number;
  /**
   * Time of the measurements, ms: stamped on events and on the saved state, so the advisory's
   * events sit on the same time line as the watcher's (they differ when a recording or the
   * simulator runs faster than real time). Default: `now`.
   */
  readonly measuredNow?: () => number;
  readonly newId?: () => string;
  /** Period of the stall check and output retry, ms (default 1000; 0 = call tick() yourself). */
  readonly tickMs?: number;
}

export interface AckOutcome {
  readonly state: AdvisoryState;
  readonly outputs_energised: boolean;
  /** False when there was nothing to acknowledge. */
  readonly changed: boolean;
}

type AdvisoryEventType =
  | 'advisory_started'
  | 'advisory_raised'
  | 'advisory_acknowledged'
  | 'advisory_cleared'
  | 'advisory_coverage'
  | 'advisory_output_fault'
  | 'advisory_stalled'
  | 'advisory_resumed';

export class SafeStopAdvisory {
  private readonly s: AdvisorySettings;
  private readonly asset: string;
  private readonly emitEvent: (e: AgentEvent) => void;
  private readonly store: LatchStore;
  private readonly log: Logger;
  private readonly now: () => number;
  private readonly measuredNow: () => number;
  private readonly newId: () => string;

  private relay: DigitalOutput | null = null;
  private lamp: DigitalOutput | null = null;
  private button: DigitalInput | null = null;
  private unwatch: (() => void) | null = null;
  private timer: NodeJS.Timeout | null = null;

  private st: AdvisoryState = 'normal';
  private since = '';
  private bearing: string | null = null;
  private channels: readonly string[] = [];
  private metSinceMs: number | null = null;
  private goneSinceMs: number | null = null;
  private lastT = -Infinity;
  private lastInputWall = 0;
  private stalled = false;
  private stopped = false;
  private without: readonly string[] | null = null;

  private written: boolean | null = null;
  private outputFault = false;
  private io: Promise<void> = Promise.resolve();
  private saving: Promise<void> = Promise.resolve();
  private saveFailed = false;
  private readonly counts = { raised: 0, acknowledged: 0, output_faults: 0 };

  private constructor(opts: AdvisoryOptions) {
    this.s = opts.settings;
    this.asset = opts.asset;
    this.emitEvent = opts.emit;
    this.store = opts.store;
    this.log = opts.log;
    this.now = opts.now ?? Date.now;
    this.measuredNow = opts.measuredNow ?? this.now;
    this.newId = opts.newId ?? randomUUID;
  }

  /**
   * Opens the lines (outputs start de-energised), restores a latched state saved before a restart,
   * then energises the outputs if no advisory is latched. Rejects only if a GPIO line cannot be
   * opened.
   */
  static async start(opts: AdvisoryOptions): Promise<SafeStopAdvisory> {
    const a = new SafeStopAdvisory(opts);
    const { gpio, settings: s } = opts;
    // The same names and lines that `turnwise outputs-off` drops after the agent died (release.ts).
    for (const o of advisoryOutputs(s))
      a[o.role] = await gpio.output(o.name, o.line, { activeLow: o.activeLow, initial: false });
    if (s.button) {
      a.button = await gpio.input('advisory acknowledge button', s.button.line, {
        activeLow: s.button.activeLow,
        debounceMs: s.button.debounceMs,
        edge: 'both',
      });
      a.unwatch = a.button.watch((pressed) => {
        if (pressed) a.acknowledge('local button');
      });
    }
    const saved = await opts.store.load();
    let note = '';
    a.since = new Date(a.measuredNow()).toISOString();
    if (saved && 'problem' in saved) {
      note = `; the saved advisory state could not be read (${saved.problem}), starting as normal`;
    } else if (saved && saved.state !== 'normal') {
      a.st = 'latched';
      a.since = saved.since_ts || a.since;
      a.bearing = saved.bearing;
      a.channels = saved.channels;
      note =
        `; an advisory ` +
        `(${saved.state}${saved.bearing ? ` at bearing ${saved.bearing}` : ''}) ` +
        `was active before the restart and stays latched until acknowledged`;
    }
    a.lastInputWall = a.now();
    a.applyOutputs();
    a.event(
      'advisory_started',
      a.st === 'normal' ? (note ? 'warning' : 'info') : 'alarm',
      `safe-stop advisory started, outputs ${a.energised() ? 'energised' : 'dropped'}${note}`,
    );
    const tickMs = opts.tickMs ?? 1000;
    if (tickMs > 0) {
      a.timer = setInterval(() => a.tick(), tickMs);
      a.timer.unref();
    }
    return a;
  }

  /** One window's verdicts. Synchronous; output writes and saves happen in the background. */
  update(input: AdvisoryInput): void {
    this.lastInputWall = this.now();
    if (this.stalled) {
      this.stalled = false;
      this.event('advisory_resumed', 'info', 'measurements reach the advisory again');
    }
    const t = input.t_ms;
    if (!(t >= this.lastT)) this.metSinceMs = this.goneSinceMs = null; // clock restarted
    this.lastT = t;
    const v = countVotes(input, this.s.vote);
    this.checkCoverage(v);
    if (v.met) {
      this.goneSinceMs = null;
      this.metSinceMs ??= t;
      if ((this.st === 'normal' || this.st === 'latched') && t - this.metSinceMs >= this.s.holdMs)
        this.raise(v);
    } else {
      this.metSinceMs = null;
      this.goneSinceMs ??= t;
      if (
        (this.st === 'raised' || this.st === 'acknowledged') &&
        t - this.goneSinceMs >= this.s.holdMs
      )
        this.conditionGone();
    }
    this.applyOutputs();
  }

  /** Acknowledges the advisory (local button or an authorised command). */
  acknowledge(by: string): AckOutcome {
    const before = this.st;
    if (before === 'raised') this.setState('acknowledged');
    else if (before === 'latched') this.setState('normal');
    else return { state: this.st, outputs_energised: this.energised(), changed: false };
    this.counts.acknowledged++;
    this.applyOutputs();
    const msg =
      this.st === 'normal'
        ? `advisory acknowledged by ${by}; the condition had cleared, outputs energised again`
        : `advisory acknowledged by ${by}; the condition is ` +
          `still present, outputs stay dropped until it clears`;
    this.event('advisory_acknowledged', 'info', msg, { acknowledged_by: by });
    return { state: this.st, outputs_energised: this.energised(), changed: true };
  }

  /** Stall check and retry of failed output writes. Called every tickMs by start(). */
  tick(): void {
    if (this.s.stallMs > 0 && !this.stalled && this.now() - this.lastInputWall > this.s.stallMs) {
      this.stalled = true;
      this.applyOutputs();
      this.event(
        'advisory_stalled',
        'warning',
        `no measurement reached the advisory for ${this.s.stallMs / 1000} s; ` +
          `outputs dropped until measurements resume (check the acquisition source)`,
      );
    } else if (this.outputFault) {
      this.applyOutputs();
    }
  }

  get state(): AdvisoryState {
    return this.st;
  }

  energised(): boolean {
    return this.st === 'normal' && !this.stalled && !this.stopped;
  }

  health(): Record<string, number | string | boolean | null> {
    return {
      advisory_state: this.st,
      advisory_outputs_energised: this.energised(),
      advisory_output_fault: this.outputFault,
      advisory_stalled: this.stalled,
      advisory_raised_total: this.counts.raised,
      advisory_acknowledged_total: this.counts.acknowledged,
      advisory_bearings_without_vote: this.without?.join(',') ?? null,
    };
  }

  /** Waits for queued output writes and state saves. */
  async settled(): Promise<void> {
    await this.io;
    await this.saving;
  }

  /**
   * Stops: de-energises the outputs and lets go of the lines (left driven, see
   * DigitalOutput.close).
   */
  async close(): Promise<void> {
    if (this.timer) clearInterval(this.timer);
    this.unwatch?.();
    this.stopped = true;
    this.applyOutputs();
    await this.settled();
    for (const line of [this.relay, this.lamp, this.button]) await line?.close().catch(() => {});
  }

  private raise(v: Vote): void {
    this.bearing = v.bearing;
    this.channels = v.channels;
    this.setState('raised');
    this.counts.raised++;
    const zone = this.s.vote.zone;
    this.event(
      'advisory_raised',
      'alarm',
      `SAFE-STOP ADVISORY: ${v.channels.length} OK channel(s) at bearing ` +
        `${v.bearing} (${v.channels.join(', ')}) in zone ` +
        `${zone}${zone === 'C' ? ' or D' : ''} for at least ${this.s.holdMs / 1000} s; ` +
        `stop the fan safely following the plant's procedure`,
      {
        bearing: v.bearing ?? undefined,
        channels: [...v.channels],
      },
    );
  }

  private conditionGone(): void {
    if (this.st === 'raised') {
      this.setState('latched');
      this.event(
        'advisory_cleared',
        'warning',
        `the advisory condition at bearing ${this.bearing} has ` +
          `cleared; the advisory stays latched until acknowledged`,
      );
    } else {
      this.setState('normal');
      this.event(
        'advisory_cleared',
        'info',
        `the advisory condition at bearing ${this.bearing} has ` +
          `cleared after acknowledgement; outputs energised again`,
      );
    }
  }

  private checkCoverage(v: Vote): void {
    const prev = this.without;
    const now = v.bearingsWithoutVote;
    if (prev !== null && prev.length === now.length && prev.every((b, i) => b === now[i])) return;
    this.without = now;
    if (prev === null && now.length === 0) return;
    if (now.length > 0) {
      this.event(
        'advisory_coverage',
        'warning',
        `too few OK channels to vote (need ${this.s.vote.minChannels}) ` +
          `at bearing(s) ${now.join(', ')}: the advisory cannot be ` +
          `raised for them until their sensors are OK`,
        { bearings_without_vote: [...now] },
      );
    } else {
      this.event(
        'advisory_coverage',
        'info',
        'every bearing has enough OK channels to vote again',
        { bearings_without_vote: [] },
      );
    }
  }

  private setState(next: AdvisoryState): void {
    this.st = next;
    this.since = new Date(this.measuredNow()).toISOString();
    const rec: LatchRecord = {
      version: 1,
      state: next,
      since_ts: this.since,
      bearing: this.bearing,
      channels: [...this.channels],
    };
    this.saving = this.saving.then(() =>
      this.store.save(rec).then(
        () => {
          if (this.saveFailed) this.log.info({}, 'advisory state is being saved again');
          this.saveFailed = false;
        },
        (e: unknown) => {
          if (!this.saveFailed)
            this.log.warn(
              { code: (e as NodeJS.ErrnoException).code },
              `cannot save the advisory state (${(e as Error).message}); a ` +
                `latched advisory would not survive a restart until this is fixed`,
            );
          this.saveFailed = true;
        },
      ),
    );
  }

  /** Writes the outputs when the wanted level changed or the last write failed. */
  private applyOutputs(): void {
    const want = this.energised();
    if (want === this.written && !this.outputFault) return;
    this.written = want;
    this.io = this.io.then(async () => {
      if (this.written !== want) return; // a newer write is queued
      try {
        for (const out of [this.relay, this.lamp]) await out?.write(want);
        if (this.outputFault) this.log.info({}, 'advisory outputs respond again');
        this.outputFault = false;
      } catch (e) {
        if (!this.outputFault) {
          this.counts.output_faults++;
          this.event(
            'advisory_output_fault',
            'alarm',
            `cannot drive the advisory relay/lamp (${(e as Error).message}); the ` +
              `outputs may not show the advisory state: check the board and its wiring`,
          );
        }
        this.outputFault = true;
      }
    });
  }

  private event(
    type: AdvisoryEventType,
    severity: AgentEvent['severity'],
    message: string,
    extra: Record<string, unknown> = {},
  ): void {
    this.emitEvent({
      id: this.newId(),
      ts: new Date(this.measuredNow()).toISOString(),
      asset: this.asset,
      type,
      severity,
      state: this.st,
      outputs_energised: this.energised(),
      message,
      ...extra,
    });
  }
}
