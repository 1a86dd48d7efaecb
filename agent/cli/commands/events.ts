import { loadConfig } from '../../config/load.js';
import { UserError } from '../../errors.js';
import { readEventLog } from '../../eventlog/event-log.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';

const usage =
  'turnwise events --config CFG.yaml [--since 24h|2026-12-01T06:00Z] ' +
  '[--until TIME] [--type T[,T...]] [--severity info|warning|alarm] [--json]';

const UNIT_MS: Record<string, number> = { s: 1000, m: 60_000, h: 3_600_000, d: 86_400_000 };

/**
 * "90s", "30m", "2h", "7d" (before now) or an ISO 8601 time; UserError naming the option otherwise.
 */
export function parseTimeOption(name: string, raw: string, nowMs: number): number {
  const d = /^(\d+(?:\.\d+)?)\s*([smhd])$/.exec(raw.trim());
  if (d) return nowMs - Number(d[1]) * UNIT_MS[d[2]];
  if (/^\d{4}-\d{2}-\d{2}/.test(raw)) {
    const t = Date.parse(raw);
    if (Number.isFinite(t)) return t;
  }
  throw new UserError(
    `turnwise events --${name}`,
    `"${raw}" is neither a duration nor a date`,
    'write a duration before now (90s, 30m, 2h, 7d) or an ISO ' +
      '8601 time (2026-12-01T06:00Z; without a zone it is local time)',
  );
}

function pad(s: string, n: number): string {
  return s.length >= n ? s : s + ' '.repeat(n - s.length);
}

/** A short description of an event for the table: its message, or the fields that say most. */
function summary(e: Record<string, unknown>): string {
  if (typeof e.message === 'string') return e.message;
  const parts: string[] = [];
  for (const k of ['zone', 'kind', 'channel', 'bearing', 'state', 'reason'])
    if (e[k] !== undefined && typeof e[k] !== 'object') parts.push(`${k}=${String(e[k])}`);
  return parts.join(' ');
}

/**
 * Reads the agent's own event log under state_dir (kept across reboots, bounded by
 * event_log.max_mb).
 */
export const eventsCommand: Command = {
  name: 'events',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('events', usage, argv, {
      config: { type: 'string', short: 'c' },
      since: { type: 'string' },
      until: { type: 'string' },
      type: { type: 'string' },
      severity: { type: 'string' },
      json: { type: 'boolean' },
    });
    if (!values.config || positionals.length > 0)
      throw new UserError(
        'turnwise events',
        values.config ? `unexpected argument "${positionals[0]}"` : 'missing --config',
        `usage: ${usage}`,
      );
    const sev = values.severity;
    if (sev !== undefined && sev !== 'info' && sev !== 'warning' && sev !== 'alarm')
      throw new UserError(
        'turnwise events --severity',
        `"${sev}" is not a severity`,
        'use info, warning or alarm (that level and above are listed)',
      );
    const cfg = loadConfig(values.config);
    const now = Date.now();
    const sinceMs =
      values.since !== undefined ? parseTimeOption('since', values.since, now) : undefined;
    const untilMs =
      values.until !== undefined ? parseTimeOption('until', values.until, now) : undefined;
    if (sinceMs !== undefined && untilMs !== undefined && untilMs < sinceMs)
      throw new UserError(
        'turnwise events --until',
        'is before --since',
        'give an --until later than --since',
      );
    const types = values.type
      ? values.type
          .split(',')
          .map((t) => t.trim())
          .filter(Boolean)
      : undefined;
    const r = readEventLog(cfg.state_dir, { sinceMs, untilMs, types, minSeverity: sev });
    if (r.skipped > 0)
      process.stderr.write(
        `turnwise events: ${r.skipped} line(s) in the event log were not ` +
          `whole events (a write cut by a power loss) and were skipped\n`,
      );
    if (values.json) {
      process.stdout.write(
        JSON.stringify(
          {
            state_dir: cfg.state_dir,
            files: r.files,
            count: r.events.length,
            skipped_lines: r.skipped,
            events: r.events,
          },
          null,
          2,
        ) + '\n',
      );
      return 0;
    }
    if (r.files.length === 0) {
      process.stdout.write(
        `no event log under ${cfg.state_dir} yet (the agent ` +
          `writes one once it has raised an ` +
          `event${cfg.event_log.enabled ? '' : '; event_log.enabled is false in this config'})\n`,
      );
      return 0;
    }
    if (r.events.length === 0) {
      process.stdout.write(`no events match (log: ${r.files.join(', ')})\n`);
      return 0;
    }
    const rows = r.events.map((e) => [e.ts, e.severity, e.type, summary(e)]);
    const w = [24, 8, Math.max(4, ...rows.map((x) => x[2].length))];
    process.stdout.write(
      `${pad('time (UTC)', w[0])}  ${pad('severity', w[1])}  ${pad('type', w[2])}  what\n`,
    );
    for (const x of rows)
      process.stdout.write(`${pad(x[0], w[0])}  ${pad(x[1], w[1])}  ${pad(x[2], w[2])}  ${x[3]}\n`);
    process.stdout.write(`${r.events.length} event(s)\n`);
    return 0;
  },
};
