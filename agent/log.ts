/**
 * The logging interface every part takes through its constructor. In production it is pino writing
 * to stdout with a syslog priority prefix so `journalctl -p warning` works (see deploy/); in tests
 * a recording fake. Structured fields first, message second, as pino does.
 */
export interface Logger {
  debug(fields: Record<string, unknown>, msg: string): void;
  info(fields: Record<string, unknown>, msg: string): void;
  warn(fields: Record<string, unknown>, msg: string): void;
  error(fields: Record<string, unknown>, msg: string): void;
}

/** A logger that keeps every line, for tests. */
export class MemoryLogger implements Logger {
  readonly lines: Array<{
    level: 'debug' | 'info' | 'warn' | 'error';
    msg: string;
    fields: Record<string, unknown>;
  }> = [];
  debug(fields: Record<string, unknown>, msg: string): void {
    this.lines.push({ level: 'debug', msg, fields });
  }
  info(fields: Record<string, unknown>, msg: string): void {
    this.lines.push({ level: 'info', msg, fields });
  }
  warn(fields: Record<string, unknown>, msg: string): void {
    this.lines.push({ level: 'warn', msg, fields });
  }
  error(fields: Record<string, unknown>, msg: string): void {
    this.lines.push({ level: 'error', msg, fields });
  }
}

/** Discards everything. */
export const silentLogger: Logger = { debug() {}, info() {}, warn() {}, error() {} };
