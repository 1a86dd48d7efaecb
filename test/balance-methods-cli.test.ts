/**
 * The balancing-method commands of docs/balancing-methods.md through the compiled CLI
 * (dist/agent/cli/main.js, built by `npm run build`) as a real process.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdtempSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { expectNoStack, runCli } from './support/cli.js';

const CLI = 'dist/agent/cli/main.js';

beforeAll(() => {
  if (!existsSync(CLI)) throw new Error(`${CLI} is missing: run \`npm run build\` first`);
  const sources = [
    ...readdirSync('agent/balance').map((f) => join('agent/balance', f)),
    'agent/cli/commands/balance.ts',
    'agent/cli/commands/zone.ts',
  ];
  for (const src of sources.filter((f) => f.endsWith('.ts') && existsSync(f))) {
    const js = join('dist', src.replace(/\.ts$/, '.js'));
    if (!existsSync(js) || statSync(js).mtimeMs < statSync(src).mtimeMs)
      throw new Error(`${js} is older than ${src}: run \`npm run build\` first`);
  }
});

function cli(args: string[]): { code: number | null; stdout: string; stderr: string } {
  const r = runCli(args);
  expectNoStack(r.stderr);
  return r;
}

function file(name: string, content: unknown): string {
  const dir = mkdtempSync(join(tmpdir(), 'tw-bal-methods-'));
  const f = join(dir, name);
  writeFileSync(f, typeof content === 'string' ? content : JSON.stringify(content, null, 2));
  return f;
}

const CAUTION_WORDS = [
  /Watch the vibration during every trial and check run/,
  /draft of other fans/,
  /confined-space entry/,
  /reference mark is work on the machine/,
  /fan maker/,
];

describe('turnwise balance four-run', () => {
  // the input of the issue (also the example of D. Shreve, "Balancing Without Phase",
  // Reliabilityweb.com)
  const four = {
    as_found: 10.0,
    trial_mass_g: 50,
    trials: [
      { angle_deg: 0, amp: 7.0 },
      { angle_deg: 120, amp: 12.0 },
      { angle_deg: 240, amp: 18.0 },
    ],
    angle_convention: 'against_rotation',
  };

  it('--json: correction, trial effect, fit residual, convention and the cautions', () => {
    const r = cli(['balance', 'four-run', file('four.json', four), '--json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    // own computation (scipy.optimize.least_squares, test/balance-four-run.test.ts): 59.26 g at
    // 41.66 deg
    expect(out.correction.mass_g).toBeCloseTo(59.26, 1);
    expect(out.correction.angle_deg).toBeCloseTo(41.66, 1);
    expect(out.trial_effect.amp).toBeCloseTo(8.44, 2);
    expect(out.fit_residual.rms_amp).toBeGreaterThan(0.1);
    expect(out.convention).toContain('AGAINST rotation');
    for (const w of CAUTION_WORDS) expect(out.cautions.join(' ')).toMatch(w);
  });

  it('table mode prints the correction with its uncertainty and the safety block', () => {
    const r = cli(['balance', 'four-run', file('four.json', four)]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/Correction to fit, with the trial weight REMOVED/);
    expect(r.stdout).toMatch(/\+\/- g/);
    for (const w of CAUTION_WORDS) expect(r.stdout).toMatch(w);
  });

  it('amplitudes that do not move: exit 3, no numbers, the reason on stderr', () => {
    const r = cli([
      'balance',
      'four-run',
      file('four.json', {
        ...four,
        trials: [
          { angle_deg: 0, amp: 10.1 },
          { angle_deg: 120, amp: 9.8 },
          { angle_deg: 240, amp: 10.0 },
        ],
      }),
      '--json',
    ]);
    expect(r.code).toBe(3);
    const out = JSON.parse(r.stdout);
    expect(out.correction).toBeNull();
    expect(out.problems[0].code).toBe('trial_no_effect');
  });

  it('a bad file names the JSON path (exit 2)', () => {
    const r = cli([
      'balance',
      'four-run',
      file('four.json', { ...four, trials: four.trials.slice(0, 2) }),
    ]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/four\.json: trials: needs the trial weight at three positions/);
  });
});

describe('cautions on every output that gives a weight to fit', () => {
  it('balance combine carries them too', () => {
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
    for (const w of CAUTION_WORDS) expect(JSON.parse(r.stdout).cautions.join(' ')).toMatch(w);
    const t = cli([
      'balance',
      'combine',
      file('c.json', { weights: [{ mass_g: 20, angle_deg: 0 }] }),
    ]);
    expect(t.stdout).toMatch(/SAFETY/);
  });
});

describe('turnwise zone', () => {
  it('ISO 20816-3 group 1 rigid: 4.6 mm/s is zone C (B/C 4.5, C/D 7.1: ISO 20816-3, from memory)', () => {
    const r = cli(['zone', '--mm-s', '4.6', '--group', '1', '--support', 'rigid', '--json']);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.zone).toBe('C');
    expect(out.boundaries.map((b: { value_mm_s: number }) => b.value_mm_s)).toEqual([
      2.3, 4.5, 7.1,
    ]);
    expect(out.boundaries[1].source).toMatch(/ISO 20816-3 group 1, rigid support/);
  });

  it('a value on a boundary belongs to the zone below; group 2 flexible; readable lines name each boundary and source', () => {
    expect(
      JSON.parse(
        cli(['zone', '--mm-s', '4.5', '--group', '2', '--support', 'flexible', '--json']).stdout,
      ).zone,
    ).toBe('B');
    const t = cli(['zone', '--mm-s', '7.2', '--group', '2', '--support', 'flexible']);
    expect(t.stdout).toMatch(/zone D of ISO 20816-3 group 2, flexible support/);
    expect(t.stdout).toMatch(/C\/D\s+7\.1 mm\/s r\.m\.s\.\s+passed\s+source: ISO 20816-3/);
  });

  it('ISO 14694 BV-3 rigid (from memory: start-up 4.5, alarm 7.1, shut-down 9.0): 8 mm/s is above alarm', () => {
    const out = JSON.parse(
      cli(['zone', '--mm-s', '8', '--fan-category', 'BV-3', '--support', 'rigid', '--json']).stdout,
    );
    expect(out.standard).toBe('ISO 14694');
    expect(out.zone).toBe('C');
    expect(out.boundaries.map((b: { value_mm_s: number }) => b.value_mm_s)).toEqual([
      4.5, 7.1, 9.0,
    ]);
    expect(out.basis).toMatch(/from memory/);
  });

  it('missing or wrong options say what to give', () => {
    const a = cli(['zone', '--mm-s', '4', '--support', 'rigid']);
    expect(a.code).toBe(2);
    expect(a.stderr).toMatch(/--group: is required/);
    const b = cli(['zone', '--mm-s', 'fast', '--group', '1', '--support', 'rigid']);
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/--mm-s/);
    const c = cli(['zone', '--mm-s', '4', '--group', '1']);
    expect(c.stderr).toMatch(/--support: is required/);
    const d = cli(['zone', '--mm-s', '4', '--fan-category', 'BV-9', '--support', 'rigid']);
    expect(d.stderr).toMatch(/expected one of BV-3, BV-4/);
  });
});

describe('turnwise balance split between holes', () => {
  it('two holes at given angles, after moving the weight to their radius; cautions included', () => {
    const r = cli([
      'balance',
      'split',
      file('s.json', {
        mass_g: 62.4,
        angle_deg: 250,
        radius_mm: 355.6,
        holes: { angles_deg: [235, 290], radius_mm: 406.4 },
      }),
      '--json',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    const moved = (62.4 * 355.6) / 406.4; // own computation
    expect(out.moved_mass_g).toBeCloseTo(moved, 3);
    expect(out.weights[0]).toMatchObject({ position: 0, angle_deg: 235 });
    expect(out.weights[0].mass_g).toBeCloseTo(
      (moved * Math.sin((40 * Math.PI) / 180)) / Math.sin((55 * Math.PI) / 180),
      3,
    );
    for (const w of CAUTION_WORDS) expect(out.cautions.join(' ')).toMatch(w);
  });

  it('holes 180 deg apart: exit 2 naming the file, the key and what to do', () => {
    const r = cli([
      'balance',
      'split',
      file('s.json', { mass_g: 30, angle_deg: 100, holes: { angles_deg: [10, 190] } }),
    ]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(
      /s\.json: holes\.angles_deg: the holes either side of 100\.0 deg \(10\.0 and 190\.0 deg\) are 180 deg apart/,
    );
    expect(r.stderr).toMatch(/-> use a hole between them/);
  });
});

describe('turnwise balance check-grade with the rotor geometry', () => {
  it('allocates U_per to the planes (ISO 21940-11, from memory) and says so', () => {
    const r = cli([
      'balance',
      'check-grade',
      '--rotor-kg',
      '850',
      '--speed-rpm',
      '1485',
      '--grade',
      'G6.3',
      '--bearings-mm',
      '0,1400',
      '--com-mm',
      '500',
      '--planes-mm',
      '300,1100',
      '--json',
    ]);
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.allocation.by_plane_g_mm.I / out.permissible_g_mm).toBeCloseTo(900 / 1400, 4);
    expect(out.allocation.basis).toMatch(/ISO 21940-11, from memory/);
  });

  it('centre of mass outside the bearings of a centre-hung rotor: the warning and the fallback, in words', () => {
    const r = cli([
      'balance',
      'check-grade',
      '--rotor-kg',
      '850',
      '--speed-rpm',
      '1485',
      '--grade',
      'G6.3',
      '--bearings-mm',
      '0,1400',
      '--com-mm',
      '1600',
      '--planes-mm',
      '300,1100',
    ]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/Warning: the centre of mass at 1600 mm lies outside the bearings/);
    expect(r.stdout).toMatch(/shared equally between the planes instead \(fallback\)/);
    const partial = cli([
      'balance',
      'check-grade',
      '--rotor-kg',
      '850',
      '--speed-rpm',
      '1485',
      '--grade',
      'G6.3',
      '--com-mm',
      '500',
    ]);
    expect(partial.code).toBe(2);
    expect(partial.stderr).toMatch(/missing --bearings-mm, --planes-mm/);
  });
});

describe('turnwise balance multi-speed', () => {
  /**
   * Exact 1x vectors of a one-plane rotor whose response is H_i per speed: V = V0 + H_i * m e^(i
   * theta) (own computation).
   */
  const runAt = (rpm: number, hAmp: number, hDeg: number) => {
    const c = (a: number, d: number) => ({
      re: a * Math.cos((d * Math.PI) / 180),
      im: a * Math.sin((d * Math.PI) / 180),
    });
    const u = c(80, 30); // unbalance 80 g at 30 deg (against rotation)
    const h = c(hAmp, hDeg);
    const resp = (z: { re: number; im: number }) => ({
      re: h.re * z.re - h.im * z.im,
      im: h.re * z.im + h.im * z.re,
    });
    const reading = (z: { re: number; im: number }) => ({
      amp: Math.hypot(z.re, z.im),
      phase_deg: ((Math.atan2(z.im, z.re) * 180) / Math.PI + 360) % 360,
    });
    const v0 = resp(u);
    const v1 = resp({ re: u.re + 50, im: u.im });
    return {
      speed_rpm: rpm,
      runs: [
        { weights: [], readings: { 'DE-H': reading(v0) } },
        { weights: [{ plane: 'P1', mass_g: 50, angle_deg: 0 }], readings: { 'DE-H': reading(v1) } },
      ],
    };
  };

  it('--json: one correction, the predicted residual per speed, cautions', () => {
    const job = {
      angle_convention: 'against_rotation',
      planes: ['P1'],
      amp_unit: 'mm/s pk',
      radius_mm: { P1: 600 },
      speeds: [runAt(800, 0.02, 40), runAt(1485, 0.07, 75)],
    };
    const r = cli(['balance', 'multi-speed', file('m.json', job), '--json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout);
    expect(out.corrections[0].mass_g).toBeCloseTo(80, 3);
    expect(out.corrections[0].angle_deg).toBeCloseTo(210, 2);
    expect(out.speeds).toHaveLength(2);
    expect(out.speeds[1].residual_share).toBeLessThan(1e-6);
    for (const w of CAUTION_WORDS) expect(out.cautions.join(' ')).toMatch(w);
    const t = cli(['balance', 'multi-speed', file('m.json', job)]);
    expect(t.stdout).toMatch(/Per speed/);
    expect(t.stdout).toMatch(/SAFETY/);
  });

  it('speeds not distinct: exit 3 and the reason on stderr', () => {
    const job = { planes: ['P1'], speeds: [runAt(1485, 0.07, 75), runAt(1490, 0.07, 75)] };
    const r = cli(['balance', 'multi-speed', file('m.json', job)]);
    expect(r.code).toBe(3);
    expect(r.stderr).toMatch(/less than 2 % apart/);
  });
});
