import { createHash, timingSafeEqual } from 'node:crypto';
import { isUserError } from '../errors.js';
import type { Logger } from '../log.js';
import { BurstLog } from '../burst-log.js';
import {
  COMMANDS,
  commandPayload,
  SCHEMA_IDS,
  type CommandName,
  type CommandPayload,
  type ReplyErrorCode,
  type ReplyPayload,
} from './payloads.js';
import type { Secret } from './secrets.js';

/**
 * Commands from the plant network. Who may command: whoever knows the command token (read from a
 * file or environment variable, compared in constant time), and — recommended on top — only the
 * users the broker's ACL lets write `<prefix>/<asset>/cmd`. Every command gets exactly one reply
 * on `<prefix>/<asset>/cmd/reply` with its correlation id; nothing a sender writes can crash the
 * agent.
 *
 * The work is done by injected handlers (advisory, watcher, balancing); a handler that is not wired
 * answers "unavailable". A handler throws UserError for a refusal the sender can fix ("rejected")
 * and anything else for a failure ("failed"); only the message goes back, never a stack.
 */

export type CommandResult = Record<string, unknown>;
type Args<C extends CommandName> = Extract<CommandPayload, { cmd: C }>['args'];
type Handler<C extends CommandName> = (args: Args<C>) => CommandResult | Promise<CommandResult>;

export interface CommandHandlers {
  acknowledgeAdvisory?: Handler<'advisory.ack'>;
  startBaseline?: Handler<'baseline.start'>;
  stopBaseline?: Handler<'baseline.stop'>;
  takeSnapshot?: Handler<'snapshot.take'>;
  takeCapture?: Handler<'capture.take'>;
  balancingSession?: Handler<'balancing.session'>;
}

const HANDLER_OF: Record<CommandName, keyof CommandHandlers> = {
  'advisory.ack': 'acknowledgeAdvisory',
  'baseline.start': 'startBaseline',
  'baseline.stop': 'stopBaseline',
  'snapshot.take': 'takeSnapshot',
  'capture.take': 'takeCapture',
  'balancing.session': 'balancingSession',
};

/** Largest command accepted, bytes. */
export const MAX_COMMAND_BYTES = 16 * 1024;
/** Replies remembered by correlation id, so a command delivered twice (QoS 1) runs once. */
const REMEMBERED_REPLIES = 64;

export interface CommandRouterOptions {
  readonly asset: string;
  readonly token: Secret;
  readonly handlers: CommandHandlers;
  readonly log: Logger;
  readonly now?: () => number;
}

function digest(b: Buffer | string): Buffer {
  return createHash('sha256').update(b).digest();
}

export class CommandRouter {
  private readonly tokenDigest: Buffer;
  private readonly handlers: CommandHandlers;
  private readonly asset: string;
  private readonly now: () => number;
  private readonly burst: BurstLog;
  private readonly recent = new Map<string, ReplyPayload>();
  readonly counts = { total: 0, refused: 0 };

  constructor(opts: CommandRouterOptions) {
    this.tokenDigest = digest(opts.token.reveal());
    this.handlers = opts.handlers;
    this.asset = opts.asset;
    this.now = opts.now ?? Date.now;
    this.burst = new BurstLog(opts.log, { nowMs: this.now, quietMs: 60_000 });
  }

  /** Handles one raw command message and returns the reply to publish. Never throws. */
  async handle(raw: Buffer): Promise<ReplyPayload> {
    this.counts.total++;
    let reply: ReplyPayload;
    try {
      reply = await this.route(raw);
    } catch (e) {
      reply = this.fail(
        null,
        null,
        'failed',
        `internal error while handling the command: ${(e as Error)?.message ?? String(e)}`,
      );
    }
    if (!reply.ok) {
      this.counts.refused++;
      this.burst.report(
        'command-refused',
        `command refused (${reply.error.code}): ` +
          `${reply.error.message}; the heartbeat counts every refusal`,
        { cmd: reply.cmd, id: reply.id },
        reply.error.code,
      );
    }
    return reply;
  }

  private async route(raw: Buffer): Promise<ReplyPayload> {
    if (raw.length > MAX_COMMAND_BYTES)
      return this.fail(
        null,
        null,
        'too_large',
        `command is ${raw.length} bytes; at most ${MAX_COMMAND_BYTES} are accepted`,
      );
    let msg: unknown;
    try {
      msg = JSON.parse(raw.toString('utf8'));
    } catch (e) {
      return this.fail(
        null,
        null,
        'malformed',
        `not valid JSON (${(e as Error).message}); send an object like {"id": ` +
          `"...", "token": "...", "cmd": "advisory.ack", "args": {"by": "..."}}`,
      );
    }
    if (!msg || typeof msg !== 'object' || Array.isArray(msg))
      return this.fail(null, null, 'malformed', 'a command must be a JSON object');
    const m = msg as Record<string, unknown>;
    const id = typeof m.id === 'string' && m.id.length > 0 && m.id.length <= 128 ? m.id : null;
    const cmdName = typeof m.cmd === 'string' ? m.cmd.slice(0, 64) : null;
    if (!this.authorised(m.token))
      return this.fail(id, cmdName, 'unauthorised', 'missing or wrong command token');
    if (id === null)
      return this.fail(
        null,
        cmdName,
        'malformed',
        'field "id" must be a string of 1-128 characters (the correlation id)',
      );
    const seen = this.recent.get(id);
    if (seen) return seen;
    if (!cmdName || !(COMMANDS as readonly string[]).includes(cmdName)) {
      return this.fail(
        id,
        cmdName,
        'unknown_command',
        `unknown command ${JSON.stringify(cmdName)}; known: ${COMMANDS.join(', ')}`,
      );
    }
    const parsed = commandPayload.safeParse(m);
    if (!parsed.success) {
      const where = parsed.error.issues
        .map((i) => `${i.path.join('.') || '(top level)'}: ${i.message}`)
        .join('; ');
      return this.fail(id, cmdName, 'invalid_args', `${cmdName}: ${where}`);
    }
    const cmd = parsed.data;
    const handler = this.handlers[HANDLER_OF[cmd.cmd]] as Handler<CommandName> | undefined;
    let reply: ReplyPayload;
    if (!handler) {
      reply = this.fail(
        id,
        cmd.cmd,
        'unavailable',
        `${cmd.cmd} is not available in this agent (that part is not running)`,
      );
    } else {
      try {
        const result = await handler(cmd.args as never);
        reply = {
          schema: SCHEMA_IDS.reply,
          asset: this.asset,
          ts: new Date(this.now()).toISOString(),
          id,
          cmd: cmd.cmd,
          ok: true,
          result,
        };
      } catch (e) {
        reply = isUserError(e)
          ? this.fail(id, cmd.cmd, 'rejected', e.format())
          : this.fail(id, cmd.cmd, 'failed', (e as Error)?.message ?? String(e));
      }
    }
    this.remember(id, reply);
    return reply;
  }

  private authorised(token: unknown): boolean {
    if (typeof token !== 'string' || token.length === 0 || token.length > 512) return false;
    // Compare fixed-length digests so the time taken says nothing about the token's length or
    // content.
    return timingSafeEqual(digest(token), this.tokenDigest);
  }

  private remember(id: string, reply: ReplyPayload): void {
    this.recent.set(id, reply);
    if (this.recent.size > REMEMBERED_REPLIES)
      this.recent.delete(this.recent.keys().next().value as string);
  }

  private fail(
    id: string | null,
    cmd: string | null,
    code: ReplyErrorCode,
    message: string,
  ): ReplyPayload {
    return {
      schema: SCHEMA_IDS.reply,
      asset: this.asset,
      ts: new Date(this.now()).toISOString(),
      id,
      cmd,
      ok: false,
      error: { code, message },
    };
  }
}
