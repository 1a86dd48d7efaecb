import type { OutputLog } from '../../agent/mqtt/burst.js';

export interface LogLine {
  readonly level: 'info' | 'warn' | 'error';
  readonly msg: string;
  readonly fields: object;
}

/** An OutputLog that keeps every line, for assertions on what the agent said (and how often). */
export class CaptureLog implements OutputLog {
  readonly lines: LogLine[] = [];
  info(fields: object, msg: string): void {
    this.lines.push({ level: 'info', msg, fields });
  }
  warn(fields: object, msg: string): void {
    this.lines.push({ level: 'warn', msg, fields });
  }
  error(fields: object, msg: string): void {
    this.lines.push({ level: 'error', msg, fields });
  }
  matching(re: RegExp, level?: LogLine['level']): LogLine[] {
    return this.lines.filter((l) => re.test(l.msg) && (!level || l.level === level));
  }
  /** Everything logged, as one string (to check that no secret appears). */
  text(): string {
    return this.lines.map((l) => `${l.level} ${l.msg} ${JSON.stringify(l.fields)}`).join('\n');
  }
}
