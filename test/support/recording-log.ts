import type { Log } from '../../drivers/log.js';

export interface LogLine {
  readonly level: 'debug' | 'info' | 'warn' | 'error';
  readonly fields: object;
  readonly msg: string;
}

/** A Log that keeps every line, for tests that check what is logged and how often. */
export class RecordingLog implements Log {
  readonly lines: LogLine[] = [];
  debug(fields: object, msg: string): void {
    this.lines.push({ level: 'debug', fields, msg });
  }
  info(fields: object, msg: string): void {
    this.lines.push({ level: 'info', fields, msg });
  }
  warn(fields: object, msg: string): void {
    this.lines.push({ level: 'warn', fields, msg });
  }
  error(fields: object, msg: string): void {
    this.lines.push({ level: 'error', fields, msg });
  }
  matching(re: RegExp): LogLine[] {
    return this.lines.filter((l) => re.test(l.msg));
  }
}
