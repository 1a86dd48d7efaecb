/**
 * Where balancing jobs are kept: one JSON record per job under
 * `<state_dir>/balance/jobs/<job_id>.json` and the influence coefficients of the last finished job
 * in `<state_dir>/balance/coefficients.json` (the watcher's balance forecast reads that file).
 * Files are written atomically: a temporary file in the same directory is written and fsync'ed,
 * renamed over the target, and the directory is fsync'ed, so a power cut leaves either the old or
 * the new file, never half of one.
 */
import { randomBytes } from 'node:crypto';
import { mkdir, open, readdir, readFile, rename, unlink } from 'node:fs/promises';
import { join } from 'node:path';
import { UserError } from '../errors.js';
import type { StoredCoefficients } from './coefficients.js';
import type { AngleConvention } from './conventions.js';
import type { BalanceJob, BalanceResult } from './job.js';
import { parseStoredCoefficients } from './job-input.js';

export interface BalanceJobRecord {
  readonly version: 1;
  readonly job_id: string;
  readonly asset: string | null;
  /** Who did the job (free text, e.g. the technician's name). */
  readonly recorded_by: string | null;
  /** ISO 8601 UTC time the record was saved. */
  readonly saved_at: string;
  readonly angle_convention: AngleConvention;
  /** The job exactly as solved: runs, vectors, weights. */
  readonly job: BalanceJob;
  readonly result: BalanceResult;
}

export interface BalanceStore {
  saveJob(record: BalanceJobRecord): Promise<void>;
  /** null when there is no such job. */
  loadJob(jobId: string): Promise<BalanceJobRecord | null>;
  /** Job ids, sorted. */
  listJobs(): Promise<string[]>;
  saveCoefficients(c: StoredCoefficients): Promise<void>;
  /** null when no job has stored coefficients yet. */
  loadCoefficients(): Promise<StoredCoefficients | null>;
}

const JOB_ID = /^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$/;

export function checkJobId(jobId: string): void {
  if (!JOB_ID.test(jobId)) {
    throw new UserError(
      `job id "${jobId}"`,
      'not a valid job id',
      'use letters, digits, "_", "." or "-" (at most 64 characters, no "/")',
    );
  }
}

/** A job id from the asset and the time, e.g. kessrow-id3a-20260301T101500Z-3f2a. */
export function newJobId(asset: string | null, now: Date): string {
  const stamp = now
    .toISOString()
    .replace(/[-:]/g, '')
    .replace(/\.\d+Z$/, 'Z');
  const prefix = asset && JOB_ID.test(asset) ? `${asset.slice(0, 40)}-` : 'job-';
  return `${prefix}${stamp}-${randomBytes(2).toString('hex')}`;
}

/** Writes `text` to `file` atomically (temp file + fsync + rename + directory fsync). */
export async function writeFileAtomic(file: string, text: string): Promise<void> {
  const dir = join(file, '..');
  const tmp = `${file}.${process.pid}.${randomBytes(4).toString('hex')}.tmp`;
  const fh = await open(tmp, 'w', 0o644);
  try {
    await fh.writeFile(text, 'utf8');
    await fh.sync();
  } finally {
    await fh.close();
  }
  try {
    await rename(tmp, file);
  } catch (e) {
    await unlink(tmp).catch(() => undefined);
    throw e;
  }
  const dh = await open(dir, 'r');
  try {
    await dh.sync();
  } finally {
    await dh.close();
  }
}

async function readJson(file: string): Promise<unknown | null> {
  let text: string;
  try {
    text = await readFile(file, 'utf8');
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw e;
  }
  try {
    return JSON.parse(text);
  } catch (e) {
    throw new UserError(
      file,
      `stored file is not valid JSON (${(e as Error).message})`,
      'restore it from a backup or delete it; the other jobs are unaffected',
    );
  }
}

/** The real store: files under `<stateDir>/balance/`. */
export class FileBalanceStore implements BalanceStore {
  readonly dir: string;
  readonly jobsDir: string;

  constructor(stateDir: string) {
    this.dir = join(stateDir, 'balance');
    this.jobsDir = join(this.dir, 'jobs');
  }

  async saveJob(record: BalanceJobRecord): Promise<void> {
    checkJobId(record.job_id);
    await mkdir(this.jobsDir, { recursive: true });
    await writeFileAtomic(
      join(this.jobsDir, `${record.job_id}.json`),
      JSON.stringify(record, null, 2) + '\n',
    );
  }

  async loadJob(jobId: string): Promise<BalanceJobRecord | null> {
    checkJobId(jobId);
    return (await readJson(join(this.jobsDir, `${jobId}.json`))) as BalanceJobRecord | null;
  }

  async listJobs(): Promise<string[]> {
    let names: string[];
    try {
      names = await readdir(this.jobsDir);
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code === 'ENOENT') return [];
      throw e;
    }
    return names
      .filter((n) => n.endsWith('.json'))
      .map((n) => n.slice(0, -5))
      .filter((n) => JOB_ID.test(n))
      .sort();
  }

  async saveCoefficients(c: StoredCoefficients): Promise<void> {
    await mkdir(this.dir, { recursive: true });
    await writeFileAtomic(join(this.dir, 'coefficients.json'), JSON.stringify(c, null, 2) + '\n');
  }

  async loadCoefficients(): Promise<StoredCoefficients | null> {
    const file = join(this.dir, 'coefficients.json');
    const raw = await readJson(file);
    return raw === null ? null : parseStoredCoefficients(raw, file);
  }
}

/** In-memory store for tests and for callers that must not touch the disk. */
export class MemoryBalanceStore implements BalanceStore {
  private readonly jobs = new Map<string, string>();
  private coefficients: string | null = null;

  async saveJob(record: BalanceJobRecord): Promise<void> {
    checkJobId(record.job_id);
    this.jobs.set(record.job_id, JSON.stringify(record));
  }

  async loadJob(jobId: string): Promise<BalanceJobRecord | null> {
    const t = this.jobs.get(jobId);
    return t === undefined ? null : (JSON.parse(t) as BalanceJobRecord);
  }

  async listJobs(): Promise<string[]> {
    return [...this.jobs.keys()].sort();
  }

  async saveCoefficients(c: StoredCoefficients): Promise<void> {
    this.coefficients = JSON.stringify(c);
  }

  async loadCoefficients(): Promise<StoredCoefficients | null> {
    return this.coefficients === null
      ? null
      : (JSON.parse(this.coefficients) as StoredCoefficients);
  }
}
