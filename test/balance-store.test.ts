import { describe, expect, it } from 'vitest';
import { mkdtempSync, readdirSync, readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { BalanceJob } from '../agent/balance/job.js';
import { parseStoredCoefficients } from '../agent/balance/job-input.js';
import { coefficientsForJob, exportCoefficients, velocityUnit } from '../agent/balance/record.js';
import { solveBalanceJob } from '../agent/balance/solve.js';
import {
  type BalanceJobRecord,
  type BalanceStore,
  FileBalanceStore,
  MemoryBalanceStore,
  newJobId,
  writeFileAtomic,
} from '../agent/balance/store.js';
import { UserError } from '../agent/errors.js';
import { measure, type RigMass, twoBearingRig } from './balance-rig.js';

function tmp(): string {
  return mkdtempSync(join(tmpdir(), 'tw-bal-'));
}

/**
 * A solved two-plane job on the simulated fan (invented Kessrow ID-3A figures), readings in mm/s
 * pk.
 */
function solvedJob(ampUnit = 'mm/s pk'): {
  job: BalanceJob;
  result: ReturnType<typeof solveBalanceJob>;
} {
  const rig = twoBearingRig('ccw');
  const U: RigMass[] = [
    { plane: 0, mass_g: 120, angle_deg: 40, convention: 'against_rotation' },
    { plane: 1, mass_g: 70, angle_deg: 200, convention: 'against_rotation' },
  ];
  const t = (plane: number, angle: number): RigMass => ({
    plane,
    mass_g: 50,
    angle_deg: angle,
    convention: 'against_rotation',
  });
  const job: BalanceJob = {
    angle_convention: 'against_rotation',
    planes: ['P1', 'P2'],
    amp_unit: ampUnit,
    runs: [
      { speed_rpm: 1485, weights: [], readings: measure(rig, U) },
      {
        speed_rpm: 1484,
        weights: [{ plane: 'P1', mass_g: 50, angle_deg: 0 }],
        readings: measure(rig, [...U, t(0, 0)]),
      },
      {
        speed_rpm: 1486,
        weights: [{ plane: 'P2', mass_g: 50, angle_deg: 0 }],
        readings: measure(rig, [...U, t(1, 0)]),
      },
    ],
  };
  return { job, result: solveBalanceJob(job) };
}

function record(jobId: string): BalanceJobRecord {
  const { job, result } = solvedJob();
  return {
    version: 1,
    job_id: jobId,
    asset: 'kessrow-id3a',
    recorded_by: 'A. Technician (invented)',
    saved_at: '2026-03-01T10:15:00.000Z',
    angle_convention: job.angle_convention,
    job,
    result,
  };
}

function contract(name: string, make: () => BalanceStore) {
  describe(`${name}: the BalanceStore contract`, () => {
    it('saves, lists, loads and overwrites jobs', async () => {
      const store = make();
      expect(await store.listJobs()).toEqual([]);
      expect(await store.loadJob('nope')).toBeNull();
      await store.saveJob(record('job-b'));
      await store.saveJob(record('job-a'));
      expect(await store.listJobs()).toEqual(['job-a', 'job-b']);
      const back = await store.loadJob('job-a');
      expect(back).toEqual(JSON.parse(JSON.stringify(record('job-a'))));
      await store.saveJob({ ...record('job-a'), recorded_by: 'someone else' });
      expect((await store.loadJob('job-a'))!.recorded_by).toBe('someone else');
    });

    it('refuses job ids that could leave the jobs directory', async () => {
      const store = make();
      await expect(store.saveJob(record('../escape'))).rejects.toBeInstanceOf(UserError);
      await expect(store.saveJob(record('a/b'))).rejects.toThrow(/not a valid job id/);
    });

    it('keeps the coefficients of the last finished job', async () => {
      const store = make();
      expect(await store.loadCoefficients()).toBeNull();
      const { job, result } = solvedJob();
      const exp = exportCoefficients(job, result, {
        asset: 'kessrow-id3a',
        jobId: 'job-a',
        savedAt: '2026-03-01T10:15:00.000Z',
      });
      if (!('coefficients' in exp)) throw new Error(exp.reason);
      await store.saveCoefficients(exp.coefficients);
      expect(await store.loadCoefficients()).toEqual(exp.coefficients);
    });
  });
}

contract('FileBalanceStore on real files', () => new FileBalanceStore(tmp()));
contract('MemoryBalanceStore (the fake)', () => new MemoryBalanceStore());

describe('FileBalanceStore files', () => {
  it('writes <state_dir>/balance/jobs/<job_id>.json and balance/coefficients.json, leaving no temporary files', async () => {
    const dir = tmp();
    const store = new FileBalanceStore(dir);
    await store.saveJob(record('kessrow-id3a-20260301T101500Z-0001'));
    const { job, result } = solvedJob();
    const exp = exportCoefficients(job, result, {
      asset: 'kessrow-id3a',
      jobId: 'kessrow-id3a-20260301T101500Z-0001',
      savedAt: '2026-03-01T10:15:00.000Z',
    });
    if (!('coefficients' in exp)) throw new Error(exp.reason);
    await store.saveCoefficients(exp.coefficients);
    expect(readdirSync(join(dir, 'balance')).sort()).toEqual(['coefficients.json', 'jobs']);
    expect(readdirSync(join(dir, 'balance', 'jobs'))).toEqual([
      'kessrow-id3a-20260301T101500Z-0001.json',
    ]);
    const onDisk = JSON.parse(
      readFileSync(join(dir, 'balance', 'jobs', 'kessrow-id3a-20260301T101500Z-0001.json'), 'utf8'),
    );
    expect(onDisk.job.runs).toHaveLength(3);
    expect(onDisk.result.corrections[0].plane).toBe('P1');
    // The stored coefficients pass the format check the watcher's side uses.
    const coeffs = parseStoredCoefficients(
      JSON.parse(readFileSync(join(dir, 'balance', 'coefficients.json'), 'utf8')),
    );
    expect(coeffs.speed_rpm).toBeCloseTo(1485, 9);
  });

  it('an interrupted write (a stray temporary file) neither shows as a job nor damages the old file', async () => {
    const dir = tmp();
    const store = new FileBalanceStore(dir);
    await store.saveJob(record('job-a'));
    const before = readFileSync(join(dir, 'balance', 'jobs', 'job-a.json'), 'utf8');
    writeFileSync(join(dir, 'balance', 'jobs', 'job-a.json.999.deadbeef.tmp'), '{"half": ');
    expect(await store.listJobs()).toEqual(['job-a']);
    expect(readFileSync(join(dir, 'balance', 'jobs', 'job-a.json'), 'utf8')).toBe(before);
  });

  it('writeFileAtomic replaces the whole file', async () => {
    const dir = tmp();
    const f = join(dir, 'x.json');
    await writeFileAtomic(f, 'first\n');
    await writeFileAtomic(f, 'second\n');
    expect(readFileSync(f, 'utf8')).toBe('second\n');
    expect(readdirSync(dir)).toEqual(['x.json']);
  });

  it('a damaged coefficients file is reported by name, not used', async () => {
    const dir = tmp();
    mkdirSync(join(dir, 'balance'), { recursive: true });
    writeFileSync(join(dir, 'balance', 'coefficients.json'), '{"version": 2}');
    await expect(new FileBalanceStore(dir).loadCoefficients()).rejects.toThrow(
      /coefficients\.json: 1 problem|coefficients\.json: \d+ problem/,
    );
    writeFileSync(join(dir, 'balance', 'coefficients.json'), 'not json');
    await expect(new FileBalanceStore(dir).loadCoefficients()).rejects.toThrow(/not valid JSON/);
  });

  it('job ids from the asset and the time', () => {
    const id = newJobId('kessrow-id3a', new Date('2026-03-01T10:15:00.123Z'));
    expect(id).toMatch(/^kessrow-id3a-20260301T101500Z-[0-9a-f]{4}$/);
    expect(newJobId(null, new Date('2026-03-01T10:15:00Z'))).toMatch(/^job-20260301T101500Z-/);
  });
});

describe('coefficients for the watcher', () => {
  it('exports in mm/s peak per gram (r.m.s. readings are scaled by sqrt 2) and refuses unknown units', () => {
    const pk = solvedJob('mm/s pk');
    const rms = solvedJob('mm/s rms');
    const meta = { asset: 'kessrow-id3a', jobId: 'j', savedAt: '2026-03-01T10:15:00.000Z' };
    const a = exportCoefficients(pk.job, pk.result, meta);
    const b = exportCoefficients(rms.job, rms.result, meta);
    if (!('coefficients' in a) || !('coefficients' in b)) throw new Error('not exported');
    expect(b.coefficients.coefficients['DE-V']!.P1!.amp_mm_s_pk_per_g).toBeCloseTo(
      a.coefficients.coefficients['DE-V']!.P1!.amp_mm_s_pk_per_g * Math.SQRT2,
      12,
    );
    // the rig's DE-V gain for P1
    expect(a.coefficients.coefficients['DE-V']!.P1!.amp_mm_s_pk_per_g).toBeCloseTo(0.06, 9);
    const um = solvedJob('um pp');
    expect(exportCoefficients(um.job, um.result, meta)).toEqual({
      reason: expect.stringContaining('the watcher needs mm/s'),
    });
    expect(exportCoefficients(pk.job, pk.result, { ...meta, asset: null })).toEqual({
      reason: expect.stringContaining('asset'),
    });
    expect(velocityUnit('mm/s 0-pk')).toBe('pk');
    expect(velocityUnit('MM/S RMS')).toBe('rms');
    expect(velocityUnit('in/s pk')).toBeNull();
  });

  it('stored coefficients come back into a trim job in its own unit, and wrong sensors are named', () => {
    const pk = solvedJob('mm/s pk');
    const exp = exportCoefficients(pk.job, pk.result, {
      asset: 'kessrow-id3a',
      jobId: 'j',
      savedAt: 't',
    });
    if (!('coefficients' in exp)) throw new Error(exp.reason);
    const trim: BalanceJob = {
      angle_convention: 'with_rotation',
      planes: ['P1', 'P2'],
      amp_unit: 'mm/s rms',
      runs: [pk.job.runs[0]!],
    };
    const c = coefficientsForJob(exp.coefficients, trim, 'coefficients.json');
    expect(c['DE-V']!.P1!.amp_per_g).toBeCloseTo(0.06 / Math.SQRT2, 9);
    const other: BalanceJob = {
      ...trim,
      runs: [{ weights: [], readings: { 'FAN-X': { amp: 1, phase_deg: 0 } } }],
    };
    expect(() => coefficientsForJob(exp.coefficients, other, 'coefficients.json')).toThrow(
      /no stored coefficients for sensor "FAN-X"/,
    );
  });
});
