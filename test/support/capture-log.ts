import { MemoryLogger } from '../../agent/log.js';

/**
 * The project's memory logger with the look-ups these tests need: which lines match, and all text.
 */
export class CaptureLog extends MemoryLogger {
  matching(re: RegExp, level?: 'debug' | 'info' | 'warn' | 'error') {
    return this.lines.filter((l) => re.test(l.msg) && (!level || l.level === level));
  }
  /** Everything logged, as one string (to check that no secret appears). */
  text(): string {
    return this.lines.map((l) => `${l.level} ${l.msg} ${JSON.stringify(l.fields)}`).join('\n');
  }
}
