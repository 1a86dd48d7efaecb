import { closeSync, fsyncSync, mkdirSync, openSync, readFileSync, renameSync, rmSync, writeSync } from 'node:fs';
import { dirname } from 'node:path';
import { UserError } from '../errors.js';

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
 * Replaces `file` with `text` so that after a crash or power cut it holds either the old or the new
 * contents: write a temporary file beside it, fsync it, rename over, fsync the directory.
 */
export function writeFileAtomic(file: string, text: string): void {
  const dir = dirname(file);
  mkdirSync(dir, { recursive: true });
  const tmp = `${file}.tmp-${process.pid}`;
  const fd = openSync(tmp, 'w');
  try {
    writeSync(fd, text);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  renameSync(tmp, file);
  fsyncDir(dir);
}

/** Appends one line and fsyncs it. A crash can leave at most a torn last line, which readers skip. */
export function appendLineDurable(file: string, line: string): void {
  const dir = dirname(file);
  mkdirSync(dir, { recursive: true });
  const fd = openSync(file, 'a');
  try {
    writeSync(fd, line.endsWith('\n') ? line : `${line}\n`);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}

/** Reads a text file; null when it does not exist. Other errors become a UserError naming the file. */
export function readTextOrNull(file: string): string | null {
  try {
    return readFileSync(file, 'utf8');
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    if (code === 'ENOENT') return null;
    throw new UserError(file, `cannot read (${code ?? String(e)})`, 'check the permissions of the state directory (state_dir)');
  }
}

/** Parses JSON from a state file; a broken file becomes a UserError naming it. */
export function parseJsonFile(file: string, text: string): unknown {
  try {
    return JSON.parse(text);
  } catch (e) {
    throw new UserError(file, `not valid JSON (${(e as Error).message})`, 'restore the file from a backup or delete it (its contents will be lost)');
  }
}

export function removeFile(file: string): boolean {
  try {
    rmSync(file);
    fsyncDir(dirname(file));
    return true;
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return false;
    throw new UserError(file, `cannot delete (${(e as NodeJS.ErrnoException).code ?? String(e)})`, 'check the permissions of the state directory (state_dir)');
  }
}
