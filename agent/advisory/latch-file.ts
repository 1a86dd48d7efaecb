import { constants } from 'node:fs';
import { mkdir, open, readFile, rename } from 'node:fs/promises';
import { dirname } from 'node:path';

/**
 * Where the advisory keeps its latched state, so that an advisory raised before a crash or a
 * restart is still latched afterwards (it is cleared only by an acknowledgement, never by a
 * reboot).
 */
export interface LatchRecord {
  readonly version: 1;
  readonly state: 'normal' | 'raised' | 'acknowledged' | 'latched';
  readonly since_ts: string;
  readonly bearing: string | null;
  readonly channels: readonly string[];
}

export interface LatchStore {
  /** null when nothing was saved yet; `{problem}` when the saved state cannot be read. */
  load(): Promise<LatchRecord | null | { problem: string }>;
  save(rec: LatchRecord): Promise<void>;
}

/** A JSON file written with temp file + fsync + rename + directory fsync. */
export class LatchFile implements LatchStore {
  constructor(readonly file: string) {}

  async load(): Promise<LatchRecord | null | { problem: string }> {
    let text: string;
    try {
      text = await readFile(this.file, 'utf8');
    } catch (e) {
      const code = (e as NodeJS.ErrnoException).code;
      return code === 'ENOENT' ? null : { problem: `cannot read ${this.file} (${code})` };
    }
    try {
      const r = JSON.parse(text) as Partial<LatchRecord>;
      if (
        r.version === 1 &&
        typeof r.state === 'string' &&
        ['normal', 'raised', 'acknowledged', 'latched'].includes(r.state)
      ) {
        return {
          version: 1,
          state: r.state,
          since_ts: String(r.since_ts ?? ''),
          bearing: r.bearing ?? null,
          channels: Array.isArray(r.channels) ? r.channels.map(String) : [],
        };
      }
      return { problem: `${this.file} does not hold an advisory state` };
    } catch {
      return { problem: `${this.file} is not valid JSON` };
    }
  }

  async save(rec: LatchRecord): Promise<void> {
    const dir = dirname(this.file);
    await mkdir(dir, { recursive: true });
    const tmp = `${this.file}.tmp`;
    const fh = await open(tmp, constants.O_WRONLY | constants.O_CREAT | constants.O_TRUNC, 0o640);
    try {
      await fh.writeFile(JSON.stringify(rec) + '\n');
      await fh.sync();
    } finally {
      await fh.close();
    }
    await rename(tmp, this.file);
    const d = await open(dir, constants.O_RDONLY | constants.O_DIRECTORY);
    try {
      await d.sync();
    } finally {
      await d.close();
    }
  }
}
