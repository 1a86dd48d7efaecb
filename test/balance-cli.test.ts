/**
 * Spawns the compiled CLI (dist/agent/cli/main.js, built by `npm ci` / `npm run build`).
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import {
  existsSync,
  mkdtempSync,
  readdirSync,
  readFileSync,
  statSync,
  writeFileSync,
} from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { BalanceJob } from '../agent/balance/job.js';
import { ISSUE_EXAMPLE_JOB, measure, type RigMass, twoBearingRig } from './balance-rig.js';

const CLI = 'dist/agent/cli/main.js';

beforeAll(() => {
  if (!existsSync(CLI)) throw new Error(`${CLI} is missing: run \`npm run build\` first`);
  // A stale build would test old code: every balancing source must be older than its compiled file.
  const sources = [
    ...readdirSync('agent/balance').map((f) => join('agent/balance', f)),
    'agent/cli/commands/balance.ts',
  ];
  for (const src of sources.filter((f) => f.endsWith('.ts'))) {
    const js = join('dist', src.replace(/\.ts$/, '.js'));
    if (!existsSync(js) || statSync(js).mtimeMs < statSync(src).mtimeMs)
      throw new Error(`${js} is older than ${src}: run \`npm run build\` first`);
  }
});

function cli(args: string[]): { code: number; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, [CLI, ...args], { encoding: 'utf8' });
  return { code: r.status ?? -1, stdout: r.stdout, stderr: r.stderr };
}

function file(name: string, content: unknown): string {
  const dir = mkdtempSync(join(tmpdir(), 'tw-bal-cli-'));
  const f = join(dir, name);
  writeFileSync(f, typeof content === 'string' ? content : JSON.stringify(content, null, 2));
  return f;
}

/** The invented Kessrow ID-3A fan, simulated: 120 g at 40 deg in P1, 70 g at 200 deg in P2. */
function kessrowJob(): BalanceJob {
  const rig = twoBearingRig('ccw');
  const U: RigMass[] = [
    { plane: 0, mass_g: 120, angle_deg: 40, convention: 'against_rotation' },
    { plane: 1, mass_g: 70, angle_deg: 200, convention: 'against_rotation' },
  ];
  const t = (plane: number): RigMass => ({
    plane,
    mass_g: 50,
    angle_deg: 0,
    convention: 'against_rotation',
  });
  return {
    asset: 'kessrow-id3a',
    angle_convention: 'against_rotation',
    planes: ['P1', 'P2'],
    amp_unit: 'mm/s pk',
    radius_mm: { P1: 600, P2: 600 },
    runs: [
      { label: 'as found', speed_rpm: 1485, weights: [], readings: measure(rig, U) },
      {
        label: 'trial P1',
        speed_rpm: 1485,
        weights: [{ plane: 'P1', mass_g: 50, angle_deg: 0 }],
        readings: measure(rig, [...U, t(0)]),
      },
      {
        label: 'trial P2',
        speed_rpm: 1485,
        weights: [{ plane: 'P2', mass_g: 50, angle_deg: 0 }],
        readings: measure(rig, [...U, t(1)]),
      },
    ],
  };
}

describe('turnwise balance solve', () => {
  it('--json: corrections relative to as found, coefficients, residuals, convention', () => {
    const r = cli(['balance', 'solve', file('job.json', kessrowJob()), '--json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.angle_convention).toBe('against_rotation');
    expect(out.convention).toContain('AGAINST rotation');
    expect(out.corrections).toHaveLength(2);
    expect(out.corrections[0]).toMatchObject({ plane: 'P1', mass_g: 120, angle_deg: 220 });
    expect(out.corrections[1]).toMatchObject({ plane: 'P2', mass_g: 70, angle_deg: 20 });
    expect(out.corrections[0].force_n).toBeCloseTo(
      0.12 * 0.6 * ((1485 * 2 * Math.PI) / 60) ** 2,
      0,
    );
    expect(out.influence_coefficients).toHaveLength(4);
    expect(out.predicted_residuals.every((v: { amp: number }) => v.amp < 1e-6)).toBe(true);
    expect(out.warnings).toEqual([]);
    expect(out.cautions.join(' ')).toMatch(/Lock out and tag out/);
  });

  it('table mode: units, convention and the safety cautions', () => {
    const r = cli(['balance', 'solve', file('job.json', kessrowJob())]);
    expect(r.code).toBe(0);
    expect(r.stdout).toContain('measured AGAINST rotation');
    expect(r.stdout).toContain('Amplitudes: mm/s pk.');
    expect(r.stdout).toMatch(/plane\s+mass g\s+angle deg/);
    expect(r.stdout).toMatch(/P1\s+120\.0\s+220\.0/);
    expect(r.stdout).toContain('SAFETY');
    expect(r.stdout).toContain('Nobody stands in line with the impeller');
  });

  it("the issue's own example (one sensor, two planes): exit 3, a clear message, no numbers", () => {
    const json = cli(['balance', 'solve', file('job.json', ISSUE_EXAMPLE_JOB), '--json']);
    expect(json.code).toBe(3);
    const out = JSON.parse(json.stdout);
    expect(out.ok).toBe(false);
    expect(out.corrections).toEqual([]);
    expect(out.problems[0].code).toBe('fewer_readings_than_planes');
    const table = cli(['balance', 'solve', file('job.json', ISSUE_EXAMPLE_JOB)]);
    expect(table.code).toBe(3);
    expect(table.stdout).toContain('NO CORRECTION GIVEN');
    expect(table.stderr).toContain('1 sensor reading per run (DE-V) for 2 planes (P1, P2)');
    expect(table.stderr).toContain('-> add readings from 1 more sensor');
  });

  it('--save records the job and the coefficients; jobs lists it; export prints it; a trim run uses them', () => {
    const state = mkdtempSync(join(tmpdir(), 'tw-bal-state-'));
    const r = cli([
      'balance',
      'solve',
      file('job.json', kessrowJob()),
      '--json',
      '--save',
      '--state-dir',
      state,
      '--by',
      'A. Technician (invented)',
      '--job-id',
      'id3a-2026-03-01',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.saved.job_id).toBe('id3a-2026-03-01');
    expect(out.saved.coefficients_file).toBe(join(state, 'balance', 'coefficients.json'));
    const rec = JSON.parse(
      readFileSync(join(state, 'balance', 'jobs', 'id3a-2026-03-01.json'), 'utf8'),
    );
    expect(rec).toMatchObject({
      version: 1,
      job_id: 'id3a-2026-03-01',
      asset: 'kessrow-id3a',
      recorded_by: 'A. Technician (invented)',
      angle_convention: 'against_rotation',
    });
    expect(Date.parse(rec.saved_at)).not.toBeNaN();
    const stored = JSON.parse(readFileSync(join(state, 'balance', 'coefficients.json'), 'utf8'));
    expect(stored).toMatchObject({
      version: 1,
      asset: 'kessrow-id3a',
      job_id: 'id3a-2026-03-01',
      speed_rpm: 1485,
      planes: ['P1', 'P2'],
    });
    expect(stored.coefficients['DE-V'].P1.amp_mm_s_pk_per_g).toBeCloseTo(0.06, 6);

    const list = cli(['balance', 'jobs', '--state-dir', state, '--json']);
    expect(JSON.parse(list.stdout)).toEqual({ jobs: ['id3a-2026-03-01'] });
    const exp = cli(['balance', 'export', 'id3a-2026-03-01', '--state-dir', state]);
    expect(exp.code).toBe(0);
    expect(JSON.parse(exp.stdout).result.corrections[1].plane).toBe('P2');

    // Trim run months later from the stored coefficients: 30 g at 100 deg crept onto P1.
    const rig = twoBearingRig('ccw');
    const trim = {
      angle_convention: 'against_rotation',
      planes: ['P1', 'P2'],
      amp_unit: 'mm/s pk',
      runs: [
        {
          speed_rpm: 1485,
          weights: [],
          readings: measure(rig, [
            { plane: 0, mass_g: 30, angle_deg: 100, convention: 'against_rotation' },
          ]),
        },
      ],
    };
    const t = cli([
      'balance',
      'solve',
      file('trim.json', trim),
      '--json',
      '--coefficients',
      join(state, 'balance', 'coefficients.json'),
    ]);
    expect(t.code).toBe(0);
    const tout = JSON.parse(t.stdout);
    expect(tout.method).toBe('given_coefficients');
    expect(tout.corrections[0]).toMatchObject({ plane: 'P1', mass_g: 30, angle_deg: 280 });
    expect(tout.corrections[1].mass_g).toBeLessThan(1e-6);
    // Without amp_unit the readings are taken in the stored unit, and the output says so.
    const { amp_unit: _unit, ...noUnit } = trim;
    const n = JSON.parse(
      cli([
        'balance',
        'solve',
        file('trim.json', noUnit),
        '--json',
        '--coefficients',
        join(state, 'balance', 'coefficients.json'),
      ]).stdout,
    );
    expect(n.amp_unit).toBe('mm/s pk');
    expect(n.warnings.map((w: { code: string }) => w.code)).toContain('unit_assumed');
  });

  it('bad JSON: exit 2, names the file and what to do, no stack trace', () => {
    const r = cli(['balance', 'solve', file('job.json', '{"planes": ["P1",], }')]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/job\.json: not valid JSON/);
    expect(r.stderr).toContain('-> fix the JSON syntax');
    expect(r.stderr).not.toMatch(/\n\s+at /);
  });

  it('a wrong field: exit 2, names the JSON path', () => {
    const bad = structuredClone(ISSUE_EXAMPLE_JOB);
    (bad.runs[1]!.weights[0] as { plane: string }).plane = 'P9';
    (bad.runs[2]!.readings['DE-V'] as { amp: number }).amp = -1;
    const r = cli(['balance', 'solve', file('job.json', bad)]);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain(
      'runs[1].weights[0].plane: "P9" is not one of the planes ("P1", "P2")',
    );
    expect(r.stderr).toContain('runs[2].readings.DE-V.amp: must be 0 or more (found -1)');
    expect(r.stderr).not.toMatch(/\n\s+at /);
  });

  it('a missing file and a missing sub-command: exit 2 with the fix', () => {
    const r = cli(['balance', 'solve', '/nonexistent/job.json']);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('/nonexistent/job.json: balancing job file not found');
    const s = cli(['balance']);
    expect(s.code).toBe(2);
    expect(s.stderr).toContain('a sub-command is needed');
    const u = cli(['balance', 'solve', 'x.json', '--jsno']);
    expect(u.code).toBe(2);
    expect(u.stderr).toMatch(/^turnwise balance: solve: Unknown option '--jsno'/);
  });
});

describe('turnwise balance split', () => {
  it('the contract example (positions numbered from 0 at first_deg)', () => {
    const r = cli([
      'balance',
      'split',
      file('split.json', {
        mass_g: 62.4,
        angle_deg: 250,
        radius_mm: 355.6,
        positions: { count: 9, first_deg: 0, radius_mm: 406.4 },
      }),
      '--json',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    // Law of sines by hand: 54.6 g moved; 42.47 g at position 6 (240 deg), 14.75 g at position
    // 7 (280 deg).
    expect(out.weights).toHaveLength(2);
    expect(out.weights[0]).toMatchObject({ position: 6, angle_deg: 240 });
    expect(out.weights[0].mass_g).toBeCloseTo(42.47, 2);
    expect(out.weights[1]).toMatchObject({ position: 7, angle_deg: 280 });
    expect(out.weights[1].mass_g).toBeCloseTo(14.75, 2);
    expect(out.moved_mass_g).toBeCloseTo(54.6, 6);
    const table = cli([
      'balance',
      'split',
      file('split.json', {
        mass_g: 62.4,
        angle_deg: 250,
        radius_mm: 355.6,
        positions: { count: 9, first_deg: 0, radius_mm: 406.4 },
      }),
    ]);
    expect(table.stdout).toContain('measured AGAINST rotation');
    expect(table.stdout).toContain('SAFETY');
  });

  it('two positions cannot hold an arbitrary weight: exit 2 naming positions.count', () => {
    const r = cli([
      'balance',
      'split',
      file('split.json', { mass_g: 10, angle_deg: 20, positions: { count: 2 } }),
    ]);
    expect(r.code).toBe(2);
    expect(r.stderr).toContain('positions.count: needs at least 3 positions');
  });
});

describe('turnwise balance trial-weight, check-grade, combine', () => {
  it('trial weight for the invented Kessrow fan: 850 kg on 2 bearings, 600 mm, 1485 r/min', () => {
    const r = cli([
      'balance',
      'trial-weight',
      '--rotor-kg',
      '850',
      '--radius-mm',
      '600',
      '--speed-rpm',
      '1485',
      '--json',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.trial_mass_g).toBeCloseTo(28.72, 2);
    expect(out.force_n / out.bearing_load_n).toBeCloseTo(0.1, 6);
    const bad = cli([
      'balance',
      'trial-weight',
      '--rotor-kg',
      'heavy',
      '--radius-mm',
      '600',
      '--speed-rpm',
      '1485',
    ]);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toContain('--rotor-kg must be a number above 0 (found "heavy")');
  });

  it('ISO 21940-11: 500 kg, 1480 r/min, G6.3 is about 20 300 g mm (ISO 21940-11, from memory)', () => {
    const r = cli([
      'balance',
      'check-grade',
      '--rotor-kg',
      '500',
      '--speed-rpm',
      '1480',
      '--grade',
      'G6.3',
      '--residual-g-mm',
      '25000',
      '--json',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(Math.abs(out.permissible_g_mm - 20300) / 20300).toBeLessThan(0.005);
    expect(out.within).toBe(false);
    const bad = cli([
      'balance',
      'check-grade',
      '--rotor-kg',
      '500',
      '--speed-rpm',
      '1480',
      '--grade',
      'G-six',
    ]);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toContain('is not a balance quality grade');
  });

  it('combines weights into one', () => {
    const r = cli([
      'balance',
      'combine',
      file('c.json', {
        weights: [
          { mass_g: 20, angle_deg: 0 },
          { mass_g: 20, angle_deg: 90 },
        ],
      }),
      '--json',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.mass_g).toBeCloseTo(28.2843, 3);
    expect(out.angle_deg).toBe(45);
  });
});

describe('--config: the balance section supplies what the job leaves out', () => {
  it('convention, plane radius and limit, rotor mass and grade come from the config; state_dir for --save', () => {
    const state = mkdtempSync(join(tmpdir(), 'tw-bal-state-'));
    const cfg = file(
      'turnwise.yaml',
      readFileSync('config/example.yaml', 'utf8').replace(
        /^state_dir:.*$/m,
        `state_dir: ${state}`,
      ) +
        '\nbalance:\n  angle_convention: with_rotation\n  rotor_mass_kg: 850\n' +
        '  grade_mm_s: 6.3\n  planes:\n    P1: { radius_mm: 600, max_mass_g: ' +
        '40, positions: { count: 10 } }\n',
    );
    const rig = twoBearingRig('cw');
    const U: RigMass[] = [{ plane: 0, mass_g: 55, angle_deg: 300, convention: 'with_rotation' }];
    const job = {
      planes: ['P1'],
      amp_unit: 'mm/s pk',
      runs: [
        { speed_rpm: 1485, weights: [], readings: measure(rig, U) },
        {
          speed_rpm: 1485,
          weights: [{ plane: 'P1', mass_g: 30, angle_deg: 45 }],
          readings: measure(rig, [
            ...U,
            { plane: 0, mass_g: 30, angle_deg: 45, convention: 'with_rotation' },
          ]),
        },
      ],
    };
    const r = cli(['balance', 'solve', file('job.json', job), '--json', '--config', cfg, '--save']);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.angle_convention).toBe('with_rotation');
    expect(out.corrections[0]).toMatchObject({
      plane: 'P1',
      mass_g: 55,
      angle_deg: 120,
      unbalance_g_mm: 33000,
      over_max: true,
    });
    expect(out.unbalance.permissible_g_mm).toBeCloseTo(
      ((60000 / (2 * Math.PI)) * 6.3 * 850) / 1485,
      0,
    );
    expect(out.saved.job_file.startsWith(join(state, 'balance', 'jobs'))).toBe(true);
    expect(JSON.parse(readFileSync(out.saved.job_file, 'utf8')).asset).toBe('kessrow-id3a');
  });
});
