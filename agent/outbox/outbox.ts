import { join } from 'node:path';
import type { AgentEvent } from '../events.js';
import { UserError } from '../errors.js';
import { QUARANTINE_DIR, quarantinePath } from '../quarantine.js';
import { nodeOutboxFs, type OutboxFs } from './fs.js';
import { decodeRecord, encodeRecord, type Severity } from './record.js';

/**
 * Durable outbox: every event is saved to its own file (write to a temporary name, fsync, rename,
 * fsync the directory) before anyone may publish it, and the file is deleted only when the broker
 * has acknowledged it (PUBACK). Files are named by a sequence number, so after a reconnect or a
 * restart the events go out in the order they were added; a duplicate after a crash is the same
 * bytes with the same event id.
 *
 * Bounded size, never silently dropping an alarm: when adding an event would exceed `maxEvents` or
 * `maxBytes`, the outbox gives up the lowest-priority event first (info before warning, oldest
 * first, the new event included); alarms are never given up, even if that takes the outbox over its
 * limit. The first drop of a burst and the end of the burst are reported as notices (the caller
 * turns them into events), and every drop is counted in `health()`.
 *
 * When the disk refuses a write (ENOSPC, EIO, read-only ...), the event is kept in memory (still
 * within the same bounds), may be published from memory, and the outbox retries with backoff;
 * the failure and the recovery are each reported once.
 */

export interface OutboxOptions {
  /** Directory of the record files, e.g. `<state_dir>/outbox`. Created if missing. */
  readonly dir: string;
  readonly fs?: OutboxFs;
  /** Most events kept (default 5000). */
  readonly maxEvents?: number;
  /** Most bytes of event JSON kept (default 8 MiB). */
  readonly maxBytes?: number;
  /** Backoff between attempts to save again after a failed write, ms (default 1000 .. 30000). */
  readonly retryMinMs?: number;
  readonly retryMaxMs?: number;
  /** Receives quarantine, store and overflow notices; called asynchronously, never inside add(). */
  readonly onNotice?: (n: OutboxNotice) => void;
  readonly now?: () => number;
}

export type OutboxNotice =
  | {
      readonly kind: 'quarantined';
      readonly file: string;
      readonly moved_to: string | null;
      readonly problem: string;
    }
  | { readonly kind: 'store_failed'; readonly code: string; readonly message: string }
  | {
      readonly kind: 'store_recovered';
      readonly failed_for_ms: number;
      readonly saved_late: number;
    }
  | {
      readonly kind: 'overflow_started';
      readonly max_events: number;
      readonly max_bytes: number;
      readonly first_dropped_type: string;
      readonly first_dropped_severity: Severity;
    }
  | {
      readonly kind: 'overflow_ended';
      readonly dropped_info: number;
      readonly dropped_warning: number;
      readonly lasted_ms: number;
    };

/** What the publisher sees of one stored event. */
export interface PendingEvent {
  readonly seq: number;
  readonly id: string;
  readonly type: string;
  readonly severity: Severity;
  /** The exact JSON to publish. */
  readonly json: string;
}

export interface OutboxHealth {
  readonly pending: number;
  readonly pending_bytes: number;
  /** Pending events that exist only in memory because the disk refused them. */
  readonly memory_only: number;
  readonly store_ok: boolean;
  /** At or over maxEvents / maxBytes (alarms may take it over). */
  readonly full: boolean;
  readonly dropped_info_total: number;
  readonly dropped_warning_total: number;
  readonly quarantined_total: number;
  readonly store_failures_total: number;
}

/**
 * 'durable': on disk. 'memory': the disk refused it, kept in memory. 'dropped': given up to stay
 * within bounds.
 */
export type AddOutcome = 'durable' | 'memory' | 'dropped';

type EntryState = 'saving' | 'durable' | 'memory';
interface Entry extends PendingEvent {
  state: EntryState;
  /** Acknowledged or dropped: remove its file once any save in progress is done. */
  gone: boolean;
}

const RANK: Record<Severity, number> = { info: 0, warning: 1, alarm: 2 };
const SEQ_DIGITS = 16;
const FINAL_RE = /^(\d{16})\.rec$/;
const TMP_RE = /^(\d{16})\.rec\.tmp$/;
const PROBE = '.write-probe';
/** Largest single event accepted; larger ones are a programming error. */
export const MAX_EVENT_BYTES = 256 * 1024;

function errCode(e: unknown): string {
  return (e as NodeJS.ErrnoException)?.code ?? 'EUNKNOWN';
}

/**
 * Waits until `outbox` is empty (true) or `timeoutMs` has passed on the `now` clock (false),
 * looking every 50 ms: how a publisher drains its outbox before an orderly stop.
 */
export async function waitUntilEmpty(
  outbox: { readonly size: number },
  now: () => number,
  timeoutMs: number,
): Promise<boolean> {
  const until = now() + timeoutMs;
  while (outbox.size > 0) {
    if (now() >= until) return false;
    await new Promise((r) => setTimeout(r, 50));
  }
  return true;
}

export class Outbox {
  readonly dir: string;
  readonly quarantineDir: string;
  private readonly fs: OutboxFs;
  private readonly maxEvents: number;
  private readonly maxBytes: number;
  private readonly retryMinMs: number;
  private readonly retryMaxMs: number;
  private readonly onNotice: (n: OutboxNotice) => void;
  private readonly now: () => number;

  /** Pending entries in sequence order (Map keeps insertion order; sequence numbers only grow). */
  private readonly entries = new Map<number, Entry>();
  private bytes = 0;
  private nextSeq = 1;
  /** Serialises every file operation. */
  private chain: Promise<unknown> = Promise.resolve();
  private readonly listeners = new Set<() => void>();

  private failingSince: number | null = null;
  private retryMs: number;
  private retryTimer: NodeJS.Timeout | null = null;
  private overflowSince: number | null = null;
  private droppedInBurst = { info: 0, warning: 0 };
  private totals = { dropped_info: 0, dropped_warning: 0, quarantined: 0, store_failures: 0 };
  private closed = false;

  private constructor(opts: OutboxOptions) {
    this.dir = opts.dir;
    this.quarantineDir = join(opts.dir, QUARANTINE_DIR);
    this.fs = opts.fs ?? nodeOutboxFs;
    this.maxEvents = opts.maxEvents ?? 5000;
    this.maxBytes = opts.maxBytes ?? 8 * 1024 * 1024;
    this.retryMinMs = opts.retryMinMs ?? 1000;
    this.retryMaxMs = opts.retryMaxMs ?? 30000;
    this.retryMs = this.retryMinMs;
    this.onNotice = opts.onNotice ?? (() => {});
    this.now = opts.now ?? Date.now;
  }

  /**
   * Opens (creating) the outbox directory and loads what a previous run left: valid records are
   * queued again in order; a finished-but-not-renamed save is completed; damaged or torn files are
   * moved to `quarantine/` and reported. A directory the agent may not use is a UserError; a disk
   * that fails otherwise (full, I/O error) opens the outbox in its in-memory fallback.
   */
  static async open(opts: OutboxOptions): Promise<Outbox> {
    const ob = new Outbox(opts);
    await ob.load();
    return ob;
  }

  private async load(): Promise<void> {
    let names: string[];
    try {
      await this.fs.mkdirp(this.quarantineDir);
      names = await this.fs.list(this.dir);
    } catch (e) {
      const code = errCode(e);
      if (code === 'EACCES' || code === 'EPERM' || code === 'ENOTDIR' || code === 'EEXIST') {
        throw new UserError(
          this.dir,
          `cannot use the outbox directory (${code})`,
          'make state_dir a directory the agent user can write (e.g. chown it to the service user)',
        );
      }
      this.enterFailing(e);
      return;
    }
    const finals = new Map<number, string>();
    const tmps = new Map<number, string>();
    for (const name of names) {
      let m = FINAL_RE.exec(name);
      if (m) {
        finals.set(Number(m[1]), name);
        continue;
      }
      m = TMP_RE.exec(name);
      if (m) tmps.set(Number(m[1]), name);
      else if (name === PROBE) await this.fs.remove(join(this.dir, name)).catch(() => {});
    }
    const seqs = [...new Set([...finals.keys(), ...tmps.keys()])].sort((a, b) => a - b);
    let changedDir = false;
    for (const seq of seqs) {
      this.nextSeq = Math.max(this.nextSeq, seq + 1);
      const finalName = finals.get(seq);
      const tmpName = tmps.get(seq);
      let loaded = false;
      if (finalName) {
        loaded = await this.loadFile(seq, finalName, '');
        if (!loaded) changedDir = true;
      }
      if (tmpName) {
        changedDir = true;
        const tmpPath = join(this.dir, tmpName);
        if (loaded) {
          // The rename happened; the temporary name is a leftover link from the same save.
          await this.fs.remove(tmpPath).catch(() => {});
        } else if (await this.loadFile(seq, tmpName, 'unfinished save: ')) {
          // Saved completely but not yet renamed when the process stopped: finish the save.
          try {
            await this.fs.rename(tmpPath, join(this.dir, recordName(seq)));
          } catch (e) {
            this.entries.get(seq)!.state = 'memory';
            this.enterFailing(e);
          }
        }
      }
    }
    if (changedDir) await this.fs.syncDir(this.dir).catch((e: unknown) => this.enterFailing(e));
    this.enforceLimits(null);
  }

  /** Reads, checks and queues one file; quarantines it if it is damaged. */
  private async loadFile(seq: number, name: string, problemPrefix: string): Promise<boolean> {
    const path = join(this.dir, name);
    let buf: Buffer;
    try {
      buf = await this.fs.read(path);
    } catch (e) {
      await this.quarantine(name, `${problemPrefix}cannot be read (${errCode(e)})`);
      return false;
    }
    const rec = decodeRecord(buf);
    if ('problem' in rec) {
      await this.quarantine(name, problemPrefix + rec.problem);
      return false;
    }
    this.entries.set(seq, {
      seq,
      id: rec.id,
      type: rec.type,
      severity: rec.severity,
      json: rec.json,
      state: 'durable',
      gone: false,
    });
    this.bytes += Buffer.byteLength(rec.json);
    return true;
  }

  private async quarantine(name: string, problem: string): Promise<void> {
    this.totals.quarantined++;
    let movedTo: string | null = quarantinePath(join(this.dir, name), this.now());
    try {
      await this.fs.rename(join(this.dir, name), movedTo);
      await this.fs.syncDir(this.quarantineDir);
    } catch {
      movedTo = null;
    }
    this.notify({ kind: 'quarantined', file: join(this.dir, name), moved_to: movedTo, problem });
  }

  /**
   * Queues an event. Never rejects and never waits on the network: the promise settles once the
   * event is on disk ('durable'), held in memory because the disk refused it ('memory'), or given
   * up under the size policy ('dropped', never for an alarm). Callers on the sampling path may
   * ignore it. Throws only for a programming error (no id/type/severity, not serialisable, too
   * large).
   */
  add(event: AgentEvent): Promise<AddOutcome> {
    if (this.closed) throw new Error('outbox is closed');
    if (
      typeof event.id !== 'string' ||
      !event.id ||
      typeof event.type !== 'string' ||
      !(event.severity in RANK)
    ) {
      throw new Error(
        `outbox.add: event needs a string id, a type and a severity ` +
          `(got id=${String(event.id)}, type=${String(event.type)})`,
      );
    }
    const json = JSON.stringify(event);
    const size = Buffer.byteLength(json);
    if (size > MAX_EVENT_BYTES)
      throw new Error(
        `outbox.add: event ${event.type} is ${size} bytes, more than ${MAX_EVENT_BYTES}`,
      );
    const seq = this.nextSeq++;
    const entry: Entry = {
      seq,
      id: event.id,
      type: event.type,
      severity: event.severity,
      json,
      state: 'saving',
      gone: false,
    };
    this.entries.set(seq, entry);
    this.bytes += size;
    this.enforceLimits(entry);
    if (entry.gone) return Promise.resolve('dropped');
    const done = this.chain.then(() => this.save(entry));
    this.chain = done;
    return done;
  }

  private async save(entry: Entry): Promise<AddOutcome> {
    if (entry.gone) return 'dropped';
    if (this.failingSince !== null) {
      entry.state = 'memory';
      this.changed();
      return 'memory';
    }
    try {
      await this.writeRecord(entry);
    } catch (e) {
      entry.state = 'memory';
      this.enterFailing(e);
      this.changed();
      return 'memory';
    }
    entry.state = 'durable';
    if (entry.gone) await this.removeFile(entry.seq);
    this.changed();
    return 'durable';
  }

  private async writeRecord(entry: Entry): Promise<void> {
    const tmp = join(this.dir, recordName(entry.seq) + '.tmp');
    try {
      await this.fs.writeNewSynced(tmp, encodeRecord(entry.json));
      await this.fs.rename(tmp, join(this.dir, recordName(entry.seq)));
    } catch (e) {
      await this.fs.remove(tmp).catch(() => {});
      throw e;
    }
    await this.fs.syncDir(this.dir);
  }

  private enterFailing(e: unknown): void {
    this.totals.store_failures++;
    if (this.failingSince === null) {
      this.failingSince = this.now();
      this.retryMs = this.retryMinMs;
      this.notify({
        kind: 'store_failed',
        code: errCode(e),
        message: (e as Error)?.message ?? String(e),
      });
    } else {
      this.retryMs = Math.min(this.retryMs * 2, this.retryMaxMs);
    }
    this.scheduleRetry();
  }

  private scheduleRetry(): void {
    if (this.retryTimer || this.closed) return;
    this.retryTimer = setTimeout(() => {
      this.retryTimer = null;
      this.chain = this.chain.then(() => this.retrySaves());
    }, this.retryMs);
    this.retryTimer.unref();
  }

  /** Saves the in-memory entries again, in order; on success the outbox is durable again. */
  private async retrySaves(): Promise<void> {
    if (this.closed || this.failingSince === null) return;
    let saved = 0;
    try {
      await this.fs.mkdirp(this.quarantineDir);
      const waiting = [...this.entries.values()].filter((e) => e.state === 'memory' && !e.gone);
      if (waiting.length === 0) {
        const probe = join(this.dir, PROBE);
        await this.fs.remove(probe).catch(() => {});
        await this.fs.writeNewSynced(probe, Buffer.from('probe\n'));
        await this.fs.remove(probe);
      }
      for (const entry of waiting) {
        if (entry.gone) continue;
        await this.writeRecord(entry);
        entry.state = 'durable';
        saved++;
        if (entry.gone) await this.removeFile(entry.seq);
      }
    } catch (e) {
      this.enterFailing(e);
      return;
    }
    const since = this.failingSince;
    this.failingSince = null;
    this.retryMs = this.retryMinMs;
    this.notify({ kind: 'store_recovered', failed_for_ms: this.now() - since, saved_late: saved });
    this.changed();
  }

  /** Gives up lowest-priority, oldest events until within bounds; alarms are kept regardless. */
  private enforceLimits(added: Entry | null): void {
    while (this.entries.size > this.maxEvents || this.bytes > this.maxBytes) {
      let victim: Entry | null = null;
      for (const e of this.entries.values()) {
        if (e.severity === 'alarm') continue;
        if (!victim || RANK[e.severity] < RANK[victim.severity]) victim = e;
        if (victim.severity === 'info') break;
      }
      if (!victim) break;
      this.drop(victim, victim === added);
    }
  }

  private drop(entry: Entry, isNew: boolean): void {
    this.forget(entry);
    if (entry.severity === 'info') this.totals.dropped_info++;
    else this.totals.dropped_warning++;
    if (this.overflowSince === null) {
      this.overflowSince = this.now();
      this.droppedInBurst = { info: 0, warning: 0 };
      this.notify({
        kind: 'overflow_started',
        max_events: this.maxEvents,
        max_bytes: this.maxBytes,
        first_dropped_type: entry.type,
        first_dropped_severity: entry.severity,
      });
    }
    if (entry.severity === 'info') this.droppedInBurst.info++;
    else this.droppedInBurst.warning++;
    if (!isNew && entry.state !== 'saving') this.queueRemove(entry.seq);
  }

  private forget(entry: Entry): void {
    if (entry.gone) return;
    entry.gone = true;
    this.entries.delete(entry.seq);
    this.bytes -= Buffer.byteLength(entry.json);
    if (
      this.overflowSince !== null &&
      this.entries.size <= this.maxEvents * 0.9 &&
      this.bytes <= this.maxBytes * 0.9
    ) {
      const lasted = this.now() - this.overflowSince;
      this.overflowSince = null;
      this.notify({
        kind: 'overflow_ended',
        dropped_info: this.droppedInBurst.info,
        dropped_warning: this.droppedInBurst.warning,
        lasted_ms: lasted,
      });
    }
  }

  private queueRemove(seq: number): void {
    this.chain = this.chain.then(() => this.removeFile(seq));
  }

  private async removeFile(seq: number): Promise<void> {
    // A failed unlink only means the event may be sent once more after a restart (same id).
    await this.fs.remove(join(this.dir, recordName(seq))).catch(() => {});
  }

  /**
   * The broker acknowledged this event (PUBACK): forget it and delete its file. Deleting is not
   * fsynced; if power fails before the unlink reaches the disk, the event is sent again with the
   * same id.
   */
  ack(seq: number): void {
    const entry = this.entries.get(seq);
    if (!entry) return;
    this.forget(entry);
    // A 'memory' entry has no file; a 'saving' one is removed by save() once its write finishes.
    if (entry.state === 'durable') this.queueRemove(seq);
  }

  /**
   * Events that may be published now, in order: stops at the first one still being saved so that
   * nothing overtakes it. Events held in memory after a disk failure are included.
   */
  *sendable(): IterableIterator<PendingEvent> {
    for (const e of this.entries.values()) {
      if (e.state === 'saving') return;
      yield e;
    }
  }

  /**
   * Calls `fn` whenever new events become sendable or the outbox empties. Returns an unsubscribe.
   */
  onChange(fn: () => void): () => void {
    this.listeners.add(fn);
    return () => this.listeners.delete(fn);
  }

  get size(): number {
    return this.entries.size;
  }

  health(): OutboxHealth {
    let memory = 0;
    for (const e of this.entries.values()) if (e.state === 'memory') memory++;
    return {
      pending: this.entries.size,
      pending_bytes: this.bytes,
      memory_only: memory,
      store_ok: this.failingSince === null,
      full: this.entries.size >= this.maxEvents || this.bytes >= this.maxBytes,
      dropped_info_total: this.totals.dropped_info,
      dropped_warning_total: this.totals.dropped_warning,
      quarantined_total: this.totals.quarantined,
      store_failures_total: this.totals.store_failures,
    };
  }

  /** Waits for every save and delete queued so far (for shutdown and tests). */
  async settled(): Promise<void> {
    let c: Promise<unknown>;
    do {
      c = this.chain;
      await c;
    } while (c !== this.chain);
  }

  /**
   * Finishes queued file work and stops retrying. Returns how many pending events exist only in
   * memory (lost at exit).
   */
  async close(): Promise<number> {
    await this.settled();
    this.closed = true;
    if (this.retryTimer) clearTimeout(this.retryTimer);
    this.retryTimer = null;
    this.listeners.clear();
    return this.health().memory_only;
  }

  private changed(): void {
    for (const fn of this.listeners) fn();
  }

  private notify(n: OutboxNotice): void {
    queueMicrotask(() => this.onNotice(n));
  }
}

export function recordName(seq: number): string {
  return `${String(seq).padStart(SEQ_DIGITS, '0')}.rec`;
}
