import { parseArgs, type ParseArgsConfig } from 'node:util';
import { loadConfig } from '../../config/load.js';
import type { Config } from '../../config/schema.js';
import { UserError } from '../../errors.js';
import { conventionText } from '../../balance/conventions.js';
import type { BalanceJob, Issue } from '../../balance/job.js';
import {
  parseBalanceJob,
  parseCombineRequest,
  parseFourRun,
  parseMultiSpeed,
  parseSplitHolesRequest,
  parseSplitRequest,
  parseStoredCoefficients,
  readJsonFile,
} from '../../balance/job-input.js';
import { solveFourRun } from '../../balance/four-run.js';
import { solveMultiSpeed } from '../../balance/multi-speed.js';
import { allocatePermissible, type RotorGeometry } from '../../balance/allocation.js';
import { coefficientsForJob, exportCoefficients } from '../../balance/record.js';
import {
  balancingCautions,
  cautionBlock,
  conventionLine,
  fixed,
  formatFourRunReport,
  formatMultiSpeedReport,
  formatSolveReport,
  formatSplitReport,
} from '../../balance/report.js';
import { solveBalanceJob } from '../../balance/solve.js';
import {
  checkJobId,
  FileBalanceStore,
  newJobId,
  type BalanceJobRecord,
} from '../../balance/store.js';
import {
  centrifugalForceN,
  combineWeights,
  moveToRadius,
  parseGrade,
  permissibleUnbalanceGmm,
  splitBetweenHoles,
  SplitRefused,
  splitOntoPositions,
  STANDARD_GRAVITY,
  suggestTrialMassG,
} from '../../balance/weights.js';
import type { Command } from '../command.js';

const usage = `turnwise balance SUB-COMMAND ...   (influence-coefficient balancing)

  solve JOB.json [--json] [--coefficients FILE] [--config FILE]
                 [--save] [--state-dir DIR] [--by NAME] [--asset ID] [--job-id ID]
      Corrections from an as-found run and trial runs (or, with --coefficients, from stored
      influence coefficients: a trim run with no trial runs). JOB.json:
        {"angle_convention": "against_rotation", "planes": ["P1", "P2"], "amp_unit": "mm/s pk",
         "runs": [{"weights": [], "readings": {"DE-V": {"amp": 6.1, "phase_deg": 120}, ...}},
                  {"weights": [{"plane": "P1", "mass_g": 50, "angle_deg": 0}], "readings": {...}}, ...]}
      runs[0] is the rotor as found; each later run lists the weights on the rotor relative to as
      found (a trial weight left in is listed again). Optional: "speed_rpm" per run, "radius_mm" and
      "max_mass_g" per plane, "rotor_mass_kg", "grade_mm_s". Corrections are relative to as found
      with all trial weights removed; the weights to add with the last run's weights left in are
      given too. --save records the job under <state_dir>/balance/jobs/ and its influence
      coefficients in <state_dir>/balance/coefficients.json (state_dir from --state-dir or --config).
      Exit 0 solved, 2 bad input, 3 the job cannot be solved (the reason is printed; no numbers).

  four-run FOUR.json [--json]
      Amplitude-only balancing in one plane (no phase reference: the tach is missing or failed):
      as found, then one trial weight at three (or more) positions in turn. FOUR.json:
        {"as_found": 10.0, "trial_mass_g": 50, "angle_convention": "against_rotation",
         "trials": [{"angle_deg": 0, "amp": 7.0}, {"angle_deg": 120, "amp": 12.0},
                    {"angle_deg": 240, "amp": 18.0}]}
      Optional: "amp_unit", "sensor", "radius_mm", "speed_rpm", "amp_scatter_pct" (default 5).
      Gives the correction (trial weight removed), its uncertainty, the trial effect and how far
      the circles miss one point (least squares). Exit 0 solved, 2 bad input, 3 the readings do
      not fix the weight (the reason is printed; no numbers).

  multi-speed MULTI.json [--json]
      One correction for a fan that runs over a speed range (variable-speed drive): runs at
      several speeds, influence coefficients per speed, least squares over all speeds and sensors.
        {"angle_convention": "against_rotation", "planes": ["P1"], "amp_unit": "mm/s pk",
         "speeds": [{"speed_rpm": 900, "weight": 1, "runs": [as found, trial runs ... as in solve]},
                    {"speed_rpm": 1485, "weight": 2, "runs": [...]}]}
      "weight" (default 1) gives a speed more say; "max_residual_share" (default 0.5) refuses a
      compromise that leaves any speed above that share of its as-found 1x. Shows the predicted
      residual at every speed and each speed's own correction. Exit 0, 2 bad input, 3 refused.

  split SPLIT.json [--json]
      Splits a weight onto fixed positions (blades, holes) by the law of sines, first moving it to
      the positions' radius (mass x r_old / r_new). SPLIT.json:
        {"mass_g": 62.4, "angle_deg": 250, "radius_mm": 355.6,
         "positions": {"count": 9, "first_deg": 0, "radius_mm": 406.4}}
      Positions are numbered from 0 at first_deg, counting in the direction angles are measured.
      Holes at any angles instead of equally spaced positions:
        {"mass_g": 62.4, "angle_deg": 250, "holes": {"angles_deg": [235, 290]}}
      two holes are used as given; with a longer list the two nearest either side of the weight.
      Refused (exit 2, with what to do): holes 180 deg apart, or no two holes either side of the
      weight less than 180 deg apart.

  combine COMBINE.json [--json]
      Several weights in one plane as one: {"weights": [{"mass_g": 20, "angle_deg": 10}, ...]}
      (with "radius_mm" on every weight, give "to_radius_mm").

  trial-weight --rotor-kg KG [--bearings N | --bearing-kg KG] --radius-mm MM --speed-rpm RPM
               [--fraction F] [--config FILE] [--json]
      Trial weight whose force is F (default 0.1) of the rotor weight on one bearing:
      m_t = F * M_b * g / (r * omega^2) (rule of thumb, common practice).

  check-grade --rotor-kg KG --speed-rpm RPM --grade G [--residual-g-mm U] [--planes N] [--json]
              [--bearings-mm A,B --com-mm X --planes-mm I,II [--rotor centre-hung|overhung]]
      ISO 21940-11 permissible residual unbalance U_per = 9549 * G * m / n (g mm; G mm/s, m kg,
      n r/min), optionally compared with a residual unbalance. With the rotor geometry (axial
      positions from one datum, mm) U_per is allocated to the two planes as ISO 21940-11 describes
      (from memory); without it, shared equally (fallback). A job file takes the same geometry as
      "geometry": {"rotor": "centre_hung", "bearing_a_mm": 0, "bearing_b_mm": 1400,
      "centre_of_mass_mm": 650, "planes_mm": {"P1": 450, "P2": 950}}.

  jobs [--state-dir DIR | --config FILE] [--json]      list recorded jobs
  export JOB_ID [--state-dir DIR | --config FILE]      print a recorded job as JSON

Angles: weight angles are measured from the reference mark, against rotation ("against_rotation",
the default) or with rotation ("with_rotation"), as the job says; phase is always the lag from
the tach edge to the 1x peak. Every output states the convention.`;

const EXIT_UNSOLVABLE = 3;

/** node:util parseArgs for one sub-command; mistakes become a UserError pointing at the help. */
function args<T extends NonNullable<ParseArgsConfig['options']>>(
  sub: string,
  argv: string[],
  options: T,
) {
  try {
    return parseArgs({ args: argv, options, allowPositionals: true, strict: true });
  } catch (e) {
    throw new UserError(
      sub,
      (e as Error).message,
      '`turnwise help balance` shows the options of every sub-command',
    );
  }
}

function num(
  sub: string,
  flag: string,
  v: string | undefined,
  opts: { required?: boolean; positive?: boolean; integer?: boolean } = {},
): number | undefined {
  if (v === undefined) {
    if (opts.required)
      throw new UserError(
        sub,
        `--${flag} is required`,
        '`turnwise help balance` shows every option',
      );
    return undefined;
  }
  const x = Number(v);
  if (!Number.isFinite(x) || (opts.positive && x <= 0) || (opts.integer && !Number.isInteger(x))) {
    throw new UserError(
      sub,
      `--${flag} must be a ` +
        `${opts.integer ? 'whole ' : ''}number${opts.positive ? ' above 0' : ''} (found ` +
        `"${v}")`,
      `give --${flag} as a plain number, e.g. --${flag} 600`,
    );
  }
  return x;
}

/**
 * Rounds numbers for JSON output: angles to 0.01 deg (0-360), other fractions to 6 significant
 * digits.
 */
function jsonText(value: unknown): string {
  return (
    JSON.stringify(
      value,
      (key, v: unknown) => {
        if (typeof v !== 'number' || Number.isInteger(v)) return v;
        if (!Number.isFinite(v)) return null;
        if (key.endsWith('_deg')) {
          const r = Math.round(v * 100) / 100;
          return r >= 360 ? r - 360 : r;
        }
        return Number(v.toPrecision(6));
      },
      2,
    ) + '\n'
  );
}

function out(text: string): void {
  process.stdout.write(text);
}

function singleFile(sub: string, positionals: string[], what: string): string {
  if (positionals.length !== 1)
    throw new UserError(
      sub,
      `expects exactly one ${what} file`,
      `usage: turnwise balance ${sub} FILE.json [--json]`,
    );
  return positionals[0]!;
}

function stateDirOf(
  sub: string,
  values: { 'state-dir'?: string; config?: string },
  cfg: Config | null,
): string {
  if (values['state-dir']) return values['state-dir'];
  if (cfg) return cfg.state_dir;
  throw new UserError(
    sub,
    'needs to know the state directory',
    'give --state-dir DIR or --config FILE (its state_dir is used)',
  );
}

/** Fills what the job leaves out from the config's `balance:` section. The job's own values win. */
function withConfigDefaults(raw: unknown, cfg: Config | null): unknown {
  const b = cfg?.balance;
  if (!b || raw === null || typeof raw !== 'object' || Array.isArray(raw)) return raw;
  const job = { ...(raw as Record<string, unknown>) };
  job.angle_convention ??= b.angle_convention;
  if (b.rotor_mass_kg !== undefined) job.rotor_mass_kg ??= b.rotor_mass_kg;
  if (b.grade_mm_s !== undefined) job.grade_mm_s ??= b.grade_mm_s;
  const planes = Array.isArray(job.planes)
    ? (job.planes as unknown[]).filter((p): p is string => typeof p === 'string')
    : [];
  for (const key of ['radius_mm', 'max_mass_g'] as const) {
    const fromCfg = Object.fromEntries(
      planes.flatMap((p) => (b.planes?.[p]?.[key] !== undefined ? [[p, b.planes[p]![key]]] : [])),
    );
    if (Object.keys(fromCfg).length)
      job[key] = { ...fromCfg, ...((job[key] as object | undefined) ?? {}) };
  }
  return job;
}

async function solve(argv: string[]): Promise<number> {
  const { values, positionals } = args('solve', argv, {
    json: { type: 'boolean' },
    coefficients: { type: 'string' },
    config: { type: 'string' },
    save: { type: 'boolean' },
    'state-dir': { type: 'string' },
    by: { type: 'string' },
    asset: { type: 'string' },
    'job-id': { type: 'string' },
  });
  const file = singleFile('solve', positionals, 'job');
  const cfg = values.config ? loadConfig(values.config) : null;
  let job: BalanceJob = parseBalanceJob(
    withConfigDefaults(readJsonFile(file, 'balancing job'), cfg),
    file,
  );
  const notes: Issue[] = [];
  if (values.coefficients) {
    const stored = parseStoredCoefficients(
      readJsonFile(values.coefficients, 'influence coefficients'),
      values.coefficients,
    );
    if (job.amp_unit === undefined) {
      job = { ...job, amp_unit: 'mm/s pk' };
      notes.push({
        code: 'unit_assumed',
        message:
          'the job gives no amp_unit: its readings are taken ' +
          'as mm/s pk, the unit of the stored coefficients',
        hint: 'set "amp_unit" in the job to say what the readings are',
      });
    }
    job = {
      ...job,
      influence_coefficients: coefficientsForJob(stored, job, values.coefficients),
      coefficients_speed_rpm: stored.speed_rpm,
    };
  }
  const solved = solveBalanceJob(job);
  const result = notes.length ? { ...solved, warnings: [...solved.warnings, ...notes] } : solved;
  const asset = values.asset ?? job.asset ?? cfg?.machine.id ?? null;

  let saved: Record<string, unknown> | null = null;
  if (values.save) {
    const store = new FileBalanceStore(stateDirOf('solve', values, cfg));
    const now = new Date();
    const jobId = values['job-id'] ?? job.job_id ?? newJobId(asset, now);
    checkJobId(jobId);
    const record: BalanceJobRecord = {
      version: 1,
      job_id: jobId,
      asset,
      recorded_by: values.by ?? null,
      saved_at: now.toISOString(),
      angle_convention: job.angle_convention,
      job,
      result,
    };
    await store.saveJob(record);
    const exp = exportCoefficients(job, result, { asset, jobId, savedAt: record.saved_at });
    if ('coefficients' in exp) await store.saveCoefficients(exp.coefficients);
    saved = {
      job_id: jobId,
      job_file: `${store.jobsDir}/${jobId}.json`,
      coefficients_file: 'coefficients' in exp ? `${store.dir}/coefficients.json` : null,
      ...('reason' in exp ? { coefficients_not_saved: exp.reason } : {}),
    };
  }

  if (values.json) {
    out(jsonText({ ...result, cautions: balancingCautions(), ...(saved ? { saved } : {}) }));
  } else {
    out(formatSolveReport(result));
    if (saved) {
      out(`Saved job ${String(saved.job_id)} to ${String(saved.job_file)}\n`);
      out(
        saved.coefficients_file
          ? `Influence coefficients stored in ${String(saved.coefficients_file)}\n`
          : `Influence coefficients not stored: ${String(saved.coefficients_not_saved)}\n`,
      );
    }
    out('\n' + cautionBlock());
  }
  return exitFor('solve', file, result, values.json === true);
}

interface Solved {
  readonly ok: boolean;
  readonly problems: readonly { readonly message: string; readonly hint: string }[];
}

/** 0, or EXIT_UNSOLVABLE with the reasons on stderr (in the JSON already when `json`). */
function exitFor(sub: string, file: string, result: Solved, json: boolean): number {
  if (result.ok) return 0;
  if (!json)
    process.stderr.write(
      `turnwise balance ${sub}: ${file}: no correction given:\n` +
        `${result.problems.map((p) => `  ${p.message}\n  -> ${p.hint}`).join('\n')}\n`,
    );
  return EXIT_UNSOLVABLE;
}

/**
 * Prints a solver's result with the cautions, as JSON or as its report, and gives the exit code.
 */
function report<R extends Solved>(
  sub: string,
  file: string,
  result: R,
  json: boolean,
  format: (r: R) => string,
): number {
  if (json) out(jsonText({ ...result, cautions: balancingCautions() }));
  else out(format(result) + '\n' + cautionBlock());
  return exitFor(sub, file, result, json);
}

async function fourRun(argv: string[]): Promise<number> {
  const { values, positionals } = args('four-run', argv, { json: { type: 'boolean' } });
  const file = singleFile('four-run', positionals, 'four-run request');
  const req = parseFourRun(readJsonFile(file, 'four-run request'), file);
  const result = solveFourRun(req);
  return report('four-run', file, result, values.json === true, formatFourRunReport);
}

async function multiSpeed(argv: string[]): Promise<number> {
  const { values, positionals } = args('multi-speed', argv, { json: { type: 'boolean' } });
  const file = singleFile('multi-speed', positionals, 'multi-speed job');
  const job = parseMultiSpeed(readJsonFile(file, 'multi-speed job'), file);
  const result = solveMultiSpeed(job);
  return report('multi-speed', file, result, values.json === true, formatMultiSpeedReport);
}

async function splitHoles(raw: unknown, file: string, json: boolean): Promise<number> {
  const req = parseSplitHolesRequest(raw, file);
  const moved =
    req.radius_mm !== undefined && req.holes.radius_mm !== undefined
      ? moveToRadius(req.mass_g, req.radius_mm, req.holes.radius_mm)
      : req.mass_g;
  let split;
  try {
    split = splitBetweenHoles(moved, req.angle_deg, req.holes.angles_deg);
  } catch (e) {
    if (e instanceof SplitRefused)
      throw new UserError(`${file}: holes.angles_deg`, e.message, e.hint);
    throw e;
  }
  const summary = {
    angle_convention: req.angle_convention,
    convention: conventionText(req.angle_convention),
    mass_g: req.mass_g,
    angle_deg: req.angle_deg,
    radius_mm: req.radius_mm ?? null,
    positions_radius_mm: req.holes.radius_mm ?? null,
    moved_mass_g: moved,
    weights: split.weights,
    total_mass_g: split.total_mass_g,
    gap_deg: split.gap_deg,
    warnings: split.warnings,
  };
  if (json) out(jsonText({ ...summary, cautions: balancingCautions() }));
  else {
    out(
      formatSplitReport(
        summary,
        'Holes are numbered 0, 1, ... in the order holes.angles_deg lists them.',
      ) +
        `  parts add up to ${fixed(split.total_mass_g, 2)} g` +
        (split.gap_deg > 0 ? ` (holes ${fixed(split.gap_deg, 1)} deg apart)` : '') +
        '\n' +
        split.warnings.map((w) => `Warning: ${w.message}\n  -> ${w.hint}\n`).join('') +
        '\n' +
        cautionBlock(),
    );
  }
  return 0;
}

async function split(argv: string[]): Promise<number> {
  const { values, positionals } = args('split', argv, { json: { type: 'boolean' } });
  const file = singleFile('split', positionals, 'split request');
  const raw = readJsonFile(file, 'split request');
  if (raw !== null && typeof raw === 'object' && 'holes' in raw)
    return splitHoles(raw, file, values.json === true);
  const req = parseSplitRequest(raw, file);
  const moved =
    req.radius_mm !== undefined && req.positions.radius_mm !== undefined
      ? moveToRadius(req.mass_g, req.radius_mm, req.positions.radius_mm)
      : req.mass_g;
  const weights = splitOntoPositions(moved, req.angle_deg, req.positions);
  const summary = {
    angle_convention: req.angle_convention,
    convention: conventionText(req.angle_convention),
    mass_g: req.mass_g,
    angle_deg: req.angle_deg,
    radius_mm: req.radius_mm ?? null,
    positions_radius_mm: req.positions.radius_mm ?? null,
    moved_mass_g: moved,
    weights,
  };
  if (values.json) out(jsonText({ ...summary, cautions: balancingCautions() }));
  else out(formatSplitReport(summary) + '\n' + cautionBlock());
  return 0;
}

async function combine(argv: string[]): Promise<number> {
  const { values, positionals } = args('combine', argv, { json: { type: 'boolean' } });
  const file = singleFile('combine', positionals, 'combine request');
  const req = parseCombineRequest(readJsonFile(file, 'combine request'), file);
  const w = combineWeights(req.weights, req.to_radius_mm);
  const result = {
    angle_convention: req.angle_convention,
    convention: conventionText(req.angle_convention),
    ...w,
    ...(req.to_radius_mm !== undefined ? { radius_mm: req.to_radius_mm } : {}),
  };
  if (values.json) out(jsonText({ ...result, cautions: balancingCautions() }));
  else {
    out(
      `${conventionLine(req.angle_convention)}\n${req.weights.length} weight(s) act as one ` +
        `weight of ${fixed(w.mass_g, 2)} g at ${fixed(w.angle_deg, 1)} deg` +
        (req.to_radius_mm !== undefined ? ` at radius ${fixed(req.to_radius_mm, 1)} mm` : '') +
        '.\n\n' +
        cautionBlock(),
    );
  }
  return 0;
}

async function trialWeight(argv: string[]): Promise<number> {
  const sub = 'trial-weight';
  const { values, positionals } = args('trial-weight', argv, {
    'rotor-kg': { type: 'string' },
    bearings: { type: 'string' },
    'bearing-kg': { type: 'string' },
    'radius-mm': { type: 'string' },
    'speed-rpm': { type: 'string' },
    fraction: { type: 'string' },
    config: { type: 'string' },
    json: { type: 'boolean' },
  });
  if (positionals.length)
    throw new UserError(
      sub,
      `unexpected argument "${positionals[0]}"`,
      'give everything as --flags; see `turnwise help balance`',
    );
  const cfg = values.config ? loadConfig(values.config) : null;
  const bearingKgFlag = num(sub, 'bearing-kg', values['bearing-kg'], { positive: true });
  const rotorKg =
    num(sub, 'rotor-kg', values['rotor-kg'], { positive: true }) ?? cfg?.balance?.rotor_mass_kg;
  const bearings =
    num(sub, 'bearings', values.bearings, { positive: true, integer: true }) ??
    cfg?.balance?.bearings ??
    2;
  if (bearingKgFlag === undefined && rotorKg === undefined) {
    throw new UserError(
      sub,
      'needs the rotor mass',
      'give --rotor-kg KG (and --bearings N, default 2), or ' +
        '--bearing-kg KG for the load on the nearest bearing',
    );
  }
  const bearingKg = bearingKgFlag ?? rotorKg! / bearings;
  const radiusMm = num(sub, 'radius-mm', values['radius-mm'], { required: true, positive: true })!;
  const speedRpm = num(sub, 'speed-rpm', values['speed-rpm'], { required: true, positive: true })!;
  const fraction = num(sub, 'fraction', values.fraction, { positive: true }) ?? 0.1;
  if (fraction > 0.5)
    throw new UserError(
      sub,
      `--fraction ${fraction} would load the bearing with more than half its static load`,
      'use 0.1 (the usual rule) or less',
    );
  const mass = suggestTrialMassG(bearingKg, radiusMm, speedRpm, fraction);
  const force = centrifugalForceN(mass, radiusMm, speedRpm);
  const result = {
    trial_mass_g: mass,
    radius_mm: radiusMm,
    speed_rpm: speedRpm,
    bearing_load_kg: bearingKg,
    bearing_load_n: bearingKg * STANDARD_GRAVITY,
    fraction,
    force_n: force,
    rule:
      'm_t = fraction * M_b * g / (r * omega^2): trial-weight force a ' +
      'fraction of the rotor weight on one bearing (common practice)',
  };
  if (values.json) out(jsonText({ ...result, cautions: balancingCautions() }));
  else {
    out(
      `Trial weight: ${fixed(mass, 1)} g at radius ${fixed(radiusMm, 1)} mm\n` +
        `  force at ${fixed(speedRpm, 0)} r/min: ${fixed(force, 0)} N = ` +
        `${fixed(fraction * 100, 0)} % of the ${fixed(bearingKg, 1)} kg ` +
        `(${fixed(bearingKg * STANDARD_GRAVITY, 0)} N) on one bearing\n` +
        `  rule: ${result.rule}\n` +
        '  After the trial run, check the 1x vector moved by at least ' +
        '30 % in amplitude or 30 deg in phase (common practice).\n\n' +
        cautionBlock(),
    );
  }
  return 0;
}

async function checkGrade(argv: string[]): Promise<number> {
  const sub = 'check-grade';
  const { values, positionals } = args('check-grade', argv, {
    'rotor-kg': { type: 'string' },
    'speed-rpm': { type: 'string' },
    grade: { type: 'string' },
    'residual-g-mm': { type: 'string' },
    planes: { type: 'string' },
    'bearings-mm': { type: 'string' },
    'com-mm': { type: 'string' },
    'planes-mm': { type: 'string' },
    rotor: { type: 'string' },
    json: { type: 'boolean' },
  });
  if (positionals.length)
    throw new UserError(
      sub,
      `unexpected argument "${positionals[0]}"`,
      'give everything as --flags; see `turnwise help balance`',
    );
  const rotorKg = num(sub, 'rotor-kg', values['rotor-kg'], { required: true, positive: true })!;
  const speedRpm = num(sub, 'speed-rpm', values['speed-rpm'], { required: true, positive: true })!;
  if (values.grade === undefined)
    throw new UserError(
      sub,
      '--grade is required',
      'give the balance quality grade, e.g. --grade G6.3 (fans usually G6.3)',
    );
  const grade = parseGrade(values.grade);
  if (!(grade > 0))
    throw new UserError(
      sub,
      `--grade "${values.grade}" is not a balance quality grade`,
      'write it as G6.3 or 6.3 (mm/s)',
    );
  const residual = num(sub, 'residual-g-mm', values['residual-g-mm']);
  if (residual !== undefined && residual < 0)
    throw new UserError(
      sub,
      '--residual-g-mm must be 0 or more',
      'give the residual unbalance magnitude in g mm',
    );
  const geometryFlags = ['bearings-mm', 'com-mm', 'planes-mm'] as const;
  const given = geometryFlags.filter((f) => values[f] !== undefined);
  let geometry: RotorGeometry | undefined;
  if (given.length) {
    if (given.length !== geometryFlags.length) {
      throw new UserError(
        sub,
        `the rotor geometry needs all of --bearings-mm, --com-mm and --planes-mm (missing ${geometryFlags
          .filter((f) => values[f] === undefined)
          .map((f) => `--${f}`)
          .join(', ')})`,
        'axial positions from one datum, mm, e.g. ' +
          '--bearings-mm 0,1400 --com-mm 650 --planes-mm 450,950',
      );
    }
    const pair = (flag: string, v: string): [number, number] => {
      const xs = v.split(',').map((x) => Number(x.trim()));
      if (xs.length !== 2 || !xs.every(Number.isFinite))
        throw new UserError(
          sub,
          `--${flag} must be two positions in mm separated by a comma (found "${v}")`,
          `e.g. --${flag} 0,1400`,
        );
      return [xs[0]!, xs[1]!];
    };
    const [ba, bb] = pair('bearings-mm', values['bearings-mm']!);
    const [p1, p2] = pair('planes-mm', values['planes-mm']!);
    const rotor = values.rotor ?? 'centre-hung';
    if (rotor !== 'centre-hung' && rotor !== 'overhung')
      throw new UserError(
        sub,
        `--rotor must be centre-hung or overhung (found "${rotor}")`,
        'centre-hung: impeller between the bearings; overhung: impeller outboard of both',
      );
    geometry = {
      rotor: rotor === 'overhung' ? 'overhung' : 'centre_hung',
      bearing_a_mm: ba,
      bearing_b_mm: bb,
      centre_of_mass_mm: num(sub, 'com-mm', values['com-mm'], { required: true })!,
      planes_mm: { I: p1, II: p2 },
    };
  }
  const planes = geometry
    ? 2
    : (num(sub, 'planes', values.planes, { positive: true, integer: true }) ?? 1);
  const uper = permissibleUnbalanceGmm(grade, rotorKg, speedRpm);
  const planeNames =
    planes === 2 ? ['I', 'II'] : Array.from({ length: planes }, (_, i) => `P${i + 1}`);
  const allocation = allocatePermissible(uper, planeNames, geometry);
  const result = {
    grade_mm_s: grade,
    rotor_mass_kg: rotorKg,
    speed_rpm: speedRpm,
    permissible_g_mm: uper,
    planes,
    permissible_per_plane_g_mm: uper / planes,
    allocation,
    residual_g_mm: residual ?? null,
    within: residual === undefined ? null : residual <= uper,
    rule:
      'ISO 21940-11: U_per = 9549 * G * m / n (g mm; G mm/s, ' +
      'm kg, n r/min), from memory: check the current edition',
  };
  if (values.json) out(jsonText(result));
  else {
    out(
      `ISO 21940-11, G${grade}: permissible residual unbalance ` +
        `${fixed(uper, 0)} g mm for a ${rotorKg} kg rotor at ${speedRpm} r/min` +
        '.\n' +
        (planes > 1
          ? `  per plane: ` +
            `${planeNames.map((p) => `${p} ${fixed(allocation.by_plane_g_mm[p]!, 0)} g mm`).join(', ')}` +
            (allocation.bearing_planes_g_mm
              ? ` (bearing planes A ${fixed(allocation.bearing_planes_g_mm.A, 0)}, B ` +
                `${fixed(allocation.bearing_planes_g_mm.B, 0)} g mm)`
              : '') +
            `\n  allocation: ${allocation.basis}\n` +
            allocation.warnings.map((w) => `  Warning: ${w.message}\n    -> ${w.hint}\n`).join('')
          : '') +
        (residual !== undefined
          ? `Residual ${fixed(residual, 0)} g mm: ` +
            `${residual <= uper ? 'WITHIN' : 'NOT within'} G${grade}.\n`
          : '') +
        `  ${result.rule}\n`,
    );
  }
  return 0;
}

async function jobs(argv: string[]): Promise<number> {
  const { values, positionals } = args('jobs', argv, {
    'state-dir': { type: 'string' },
    config: { type: 'string' },
    json: { type: 'boolean' },
  });
  if (positionals.length)
    throw new UserError(
      'jobs',
      `unexpected argument "${positionals[0]}"`,
      'usage: turnwise balance jobs [--state-dir DIR | --config FILE] [--json]',
    );
  const cfg = values.config ? loadConfig(values.config) : null;
  const store = new FileBalanceStore(stateDirOf('jobs', values, cfg));
  const ids = await store.listJobs();
  if (values.json) out(jsonText({ jobs: ids }));
  else out(ids.length ? ids.join('\n') + '\n' : `no balancing jobs recorded in ${store.jobsDir}\n`);
  return 0;
}

async function exportJob(argv: string[]): Promise<number> {
  const { values, positionals } = args('export', argv, {
    'state-dir': { type: 'string' },
    config: { type: 'string' },
  });
  if (positionals.length !== 1)
    throw new UserError(
      'export',
      'expects exactly one job id',
      'usage: turnwise balance export JOB_ID [--state-dir DIR ' +
        '| --config FILE]; `turnwise balance jobs` lists them',
    );
  const cfg = values.config ? loadConfig(values.config) : null;
  const store = new FileBalanceStore(stateDirOf('export', values, cfg));
  const rec = await store.loadJob(positionals[0]!);
  if (!rec)
    throw new UserError(
      'export',
      `no job "${positionals[0]}" in ${store.jobsDir}`,
      '`turnwise balance jobs` lists the recorded jobs',
    );
  out(JSON.stringify(rec, null, 2) + '\n');
  return 0;
}

const subcommands: Record<string, (argv: string[]) => Promise<number>> = {
  solve,
  'four-run': fourRun,
  'multi-speed': multiSpeed,
  split,
  combine,
  'trial-weight': trialWeight,
  'check-grade': checkGrade,
  jobs,
  export: exportJob,
};

export const balanceCommand: Command = {
  name: 'balance',
  usage,
  async run(argv) {
    const [sub, ...rest] = argv;
    const fn = sub ? subcommands[sub] : undefined;
    if (!fn) {
      throw new UserError(
        sub ? `"${sub}"` : 'arguments',
        sub ? 'is not a balance sub-command' : 'a sub-command is needed',
        `one of: ${Object.keys(subcommands).join(', ')}; \`turnwise help balance\` shows them`,
      );
    }
    return fn(rest);
  },
};
