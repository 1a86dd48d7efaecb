import {
  closeSync,
  fstatSync,
  fsyncSync,
  ftruncateSync,
  mkdirSync,
  openSync,
  readFileSync,
  renameSync,
  rmSync,
  writeSync,
} from 'node:fs';
import { dirname } from 'node:path';
import { UserError } from '../errors.js';
import { quarantinePath } from '../quarantine.js';

/**
 * A state file that exists but cannot be read or understood (not JSON, unexpected contents, a read
 * error other than missing permissions). The watcher moves such a file aside and starts without it.
 */
export class DamagedFileError extends UserError {
  constructor(
    readonly file: string,
    /** What is wrong with it, in a few words. */
    readonly problem: string,
    hint: string,
  ) {
    super(file, problem, hint);
  }
}

/** Flushes a directory entry (after a rename or a new file) so it survives a power cut. */
export function fsyncDir(dir: string): void {
  const fd = openSync(dir, 'r');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}

/**
 * Writes all of `text` (writeSync may write less than asked, e.g. into the last free block of a
 * disk).
 */
function writeAll(fd: number, text: string): void {
  const buf = Buffer.from(text);
  let off = 0;
  while (off < buf.length) off += writeSync(fd, buf, off, buf.length - off);
}

/**
 * Replaces `file` with `text` so that after a crash or power cut it holds either the old or the new
 * contents: write a temporary file beside it, fsync it, rename over, fsync the directory. When that
 * fails (full disk), the temporary file is removed again and the old contents stay.
 */
export function writeFileAtomic(file: string, text: string, mode = 0o666): void {
  const dir = dirname(file);
  mkdirSync(dir, { recursive: true });
  const tmp = `${file}.tmp-${process.pid}`;
  try {
    const fd = openSync(tmp, 'w', mode);
    try {
      writeAll(fd, text);
      fsyncSync(fd);
    } finally {
      closeSync(fd);
    }
    renameSync(tmp, file);
  } catch (e) {
    try {
      rmSync(tmp, { force: true });
    } catch {
      // the write's own error is the one to report
    }
    throw e;
  }
  fsyncDir(dir);
}

/**
 * Appends one line and fsyncs it. When the write fails (full disk), the file is cut back to its old
 * length, so no torn line is left to swallow the next append; a crash can still leave a torn last
 * line, which readers skip.
 */
export function appendLineDurable(file: string, line: string): void {
  const dir = dirname(file);
  mkdirSync(dir, { recursive: true });
  const fd = openSync(file, 'a');
  try {
    const size = fstatSync(fd).size;
    try {
      writeAll(fd, line.endsWith('\n') ? line : `${line}\n`);
      fsyncSync(fd);
    } catch (e) {
      try {
        ftruncateSync(fd, size);
      } catch {
        // the write's own error is the one to report
      }
      throw e;
    }
  } finally {
    closeSync(fd);
  }
}

/**
 * Reads a text file; null when it does not exist. Missing permissions are a UserError naming the
 * file (the installation needs fixing); any other read error means the file is damaged
 * (DamagedFileError).
 */
export function readTextOrNull(file: string): string | null {
  try {
    return readFileSync(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ENOENT') return null;
    if (code === 'EACCES' || code === 'EPERM')
      throw new UserError(
        file,
        `cannot read (${code})`,
        'check the permissions of the state directory (state_dir)',
      );
    throw new DamagedFileError(
      file,
      `cannot be read (${code ?? String(e)})`,
      'restore the file from a backup or delete it (its contents will be lost)',
    );
  }
}

/** Parses JSON from a state file; a broken file becomes a DamagedFileError naming it. */
export function parseJsonFile(file: string, text: string): unknown {
  try {
    return JSON.parse(text);
  } catch (e) {
    throw new DamagedFileError(
      file,
      `not valid JSON (${(e as Error).message})`,
      'restore the file from a backup or delete it (its contents will be lost)',
    );
  }
}

/**
 * Moves a damaged state file to `quarantine/` beside it (see quarantinePath) for inspection.
 * Returns where it went, or null when it could not be moved (it is then left where it is).
 */
export function moveAside(file: string, nowMs: number): string | null {
  const to = quarantinePath(file, nowMs);
  try {
    mkdirSync(dirname(to), { recursive: true });
    renameSync(file, to);
  } catch {
    return null;
  }
  try {
    fsyncDir(dirname(to));
    fsyncDir(dirname(file));
  } catch {
    // moved; only the flush of the directory entries failed
  }
  return to;
}

export function removeFile(file: string): boolean {
  try {
    rmSync(file);
    fsyncDir(dirname(file));
    return true;
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return false;
    throw new UserError(
      file,
      `cannot delete (${(e as NodeJS.ErrnoException).code ?? String(e)})`,
      'check the permissions of the state directory (state_dir)',
    );
  }
}
