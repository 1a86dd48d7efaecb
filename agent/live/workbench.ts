/**
 * The balancing workbench behind the live page: one balancing job at a time on this fan, run by an
 * operator step by step. The maths is agent/balance's (solveBalanceJob, trialMove, the weight
 * arithmetic); this module keeps the job's state, captures each run from the live 1x vectors, checks
 * every request against the state of the job, and records everything (who, when, what) through the
 * balancing store, so a restart loses nothing but a capture in progress.
 *
 * A job is a sequence of runs. runs[0] is the rotor as found. Each later run is DECLARED first (the
 * weights removed and fitted since the previous run, with the safety cautions acknowledged), then
 * CAPTURED (its 1x vectors averaged at steady speed). Weights are kept relative to as found, with an
 * id each (T1, T2 ... trial, C1, C2 ... correction), the radius they sit at, and the job's angle
 * convention. The solver gets each weight as its equivalent mass at the plane's radius.
 *
 *  trial jobs:  as found -> trial run(s) -> solve -> check run (corrections fitted) -> [trim -> check] -> finish
 *  trim jobs:   as found -> solve from the stored influence coefficients -> check run -> finish
 *
 * The saved record is agent/balance's BalanceJobRecord: `job` and `result` are the job exactly as
 * solved for the correction (as found plus trial runs, or as found plus the stored coefficients), and
 * `workbench` holds every run (check runs included) with its capture details and the action log.
 */
import type { z } from 'zod';
import type { StoredCoefficients } from '../balance/coefficients.js';
import { conventionText, type AngleConvention } from '../balance/conventions.js';
import type { BalanceJob, BalanceResult, CoefficientValue, Issue, JobRun, PlaneWeight } from '../balance/job.js';
import { coefficientsForJob, exportCoefficients } from '../balance/record.js';
import { balancingCautions } from '../balance/report.js';
import { solveBalanceJob, trialMove, type TrialMove } from '../balance/solve.js';
import { newJobId, type BalanceJobRecord, type BalanceStore } from '../balance/store.js';
import { centrifugalForceN, parseGrade, permissibleUnbalanceGmm, splitOntoPositions, suggestTrialMassG, type SplitPart } from '../balance/weights.js';
import type { Clock } from '../clock.js';
import type { Config } from '../config/schema.js';
import type { LiveFrame } from '../dsp/types.js';
import { isUserError, UserError } from '../errors.js';
import type { AgentEvent } from '../events.js';
import type { Logger } from '../log.js';
import type { LiveRole } from './auth.js';
import { RunCapture, type CaptureProgress, type CaptureResult, type CaptureSettings } from './capture.js';
import {
  ApiError,
  badRequest,
  byOnlySchema,
  captureSchema,
  conflict,
  createJobSchema,
  declareRunSchema,
  finishSchema,
  parseBody,
  reasonSchema,
  type JobKind,
} from './requests.js';

/** Who did something: the name typed on the page and the token (holder name and role) it came with. */
export interface Actor {
  readonly name: string;
  readonly token: string;
  readonly role: LiveRole | 'command';
}

export interface PlaneSetup {
  readonly name: string;
  readonly radius_mm: number;
  readonly max_mass_g: number | null;
  readonly positions: { readonly count: number; readonly first_deg: number } | null;
}

export interface JobSetup {
  readonly kind: JobKind;
  readonly angle_convention: AngleConvention;
  readonly planes: readonly PlaneSetup[];
  readonly sensors: readonly string[];
  readonly rotor_mass_kg: number | null;
  readonly bearings: number;
  readonly grade_mm_s: number | null;
  /** Speed the job is run at, r/min, when given (else the live speed is used for forces). */
  readonly speed_rpm: number | null;
  readonly notes: string | null;
  /** Trim jobs: the stored coefficients used. */
  readonly coefficients_from: { readonly job_id: string; readonly saved_at: string; readonly speed_rpm: number } | null;
}

export interface FittedWeight {
  readonly id: string;
  readonly role: 'trial' | 'correction';
  readonly plane: string;
  readonly mass_g: number;
  /** In the job's angle convention, 0-360. */
  readonly angle_deg: number;
  readonly radius_mm: number;
}

export interface WeightChange {
  readonly action: 'remove' | 'fit';
  readonly weight: FittedWeight;
  /** Centrifugal force at the job speed, N (null when no speed is known). */
  readonly force_n: number | null;
}

export interface TrialCheckRow extends TrialMove {
  readonly sensor: string;
}

export interface ResidualReport {
  /** Per sensor: the check run against as found (mm/s pk). */
  readonly sensors: ReadonlyArray<{ readonly sensor: string; readonly as_found_pk_mm_s: number; readonly amp_pk_mm_s: number; readonly phase_deg: number; readonly pct_of_as_found: number }>;
  /** Residual unbalance per plane from the check run through the job's coefficients, g mm. */
  readonly unbalance_g_mm: Readonly<Record<string, number>> | null;
  readonly permissible_g_mm: number | null;
  readonly permissible_per_plane_g_mm: number | null;
  readonly within_grade: boolean | null;
  /** Weights to add on top of those fitted to remove the residual (a trim run). */
  readonly trim: readonly PlaneWeight[];
  readonly warnings: readonly Issue[];
}

export interface WorkbenchRun {
  readonly index: number;
  readonly label: string;
  readonly purpose: 'as_found' | 'trial' | 'check';
  /** Every weight on the rotor at this run, relative to as found. */
  readonly weights: readonly FittedWeight[];
  /** What changed since the previous run. */
  readonly changes: readonly WeightChange[];
  readonly declared_at: string;
  readonly declared_by: Actor;
  readonly cautions_acknowledged: boolean;
  capture: (CaptureResult & { readonly at: string; readonly by: Actor }) | null;
  /** Earlier captures of this run that were repeated. */
  earlier_captures: Array<CaptureResult & { readonly at: string; readonly by: Actor }>;
  capture_failures: Array<{ readonly at: string; readonly why: string }>;
  trial_check: readonly TrialCheckRow[] | null;
  residual: ResidualReport | null;
  discarded: { readonly at: string; readonly by: Actor; readonly reason: string } | null;
}

export interface Solution {
  readonly at: string;
  readonly by: Actor;
  readonly job: BalanceJob;
  readonly result: BalanceResult;
}

export interface LogEntry {
  readonly at: string;
  readonly by: Actor;
  readonly action: string;
  readonly detail: string;
}

export interface WorkbenchJob {
  readonly version: 1;
  readonly job_id: string;
  readonly asset: string;
  status: 'open' | 'finished' | 'abandoned';
  readonly created_at: string;
  readonly created_by: Actor;
  readonly setup: JobSetup;
  readonly runs: WorkbenchRun[];
  solution: Solution | null;
  coefficients: { readonly saved: boolean; readonly reason: string | null } | null;
  closed: { readonly at: string; readonly by: Actor; readonly note: string | null } | null;
  readonly log: LogEntry[];
  counters: { trial: number; correction: number };
}

/** The saved record: agent/balance's, plus the workbench's own state. */
export interface WorkbenchRecord extends BalanceJobRecord {
  readonly workbench: WorkbenchJob;
}

export interface ProposedChange {
  readonly title: string;
  readonly remove: 'all' | 'all_trials' | readonly string[];
  readonly add: ReadonlyArray<{ readonly plane: string; readonly mass_g: number; readonly angle_deg: number; readonly radius_mm: number }>;
  /** The same weights split onto each plane's fixed positions (null when no plane has positions). */
  readonly add_split: ReadonlyArray<{ readonly plane: string; readonly mass_g: number; readonly angle_deg: number; readonly radius_mm: number; readonly position: number }> | null;
}

export type JobStep = 'capture' | 'trial' | 'solve' | 'correct' | 'check' | 'closed';

export interface JobView {
  readonly job: WorkbenchJob;
  readonly convention: string;
  readonly step: JobStep;
  /** What to do next, in words. */
  readonly next: string;
  readonly capture: CaptureProgress | null;
  readonly weights_on_rotor: readonly FittedWeight[];
  readonly speed_for_forces_rpm: number | null;
  readonly trial_suggestion: ReadonlyArray<{ readonly plane: string; readonly mass_g: number; readonly radius_mm: number; readonly force_n: number; readonly bearing_load_kg: number }> | null;
  readonly trial_suggestion_missing: string | null;
  readonly proposals: readonly ProposedChange[];
  readonly cautions: readonly string[];
}

export interface WorkbenchDeps {
  readonly config: Config;
  readonly store: BalanceStore;
  readonly clock: Clock;
  readonly logger: Logger;
  readonly emit: (e: AgentEvent) => void | Promise<void>;
  readonly onCoefficientsSaved?: () => void;
  readonly capture: Omit<CaptureSettings, 'revolutions'> & { readonly revolutions: number };
  /** Latest live speed, r/min. */
  readonly liveSpeed: () => number | null;
  /** Told whenever the open job changes (also on capture progress). */
  readonly onChange?: (view: JobView | null) => void;
}

const TRIALS_NEEDED: Record<JobKind, number> = { single_plane: 1, two_plane: 2, static_couple: 2, trim: 0 };
const PLANES_NEEDED: Record<JobKind, number> = { single_plane: 1, two_plane: 2, static_couple: 2, trim: 0 };
const AMP_UNIT = 'mm/s pk';

function wrap360(a: number): number {
  const r = a % 360;
  return r < 0 ? r + 360 : r === 360 ? 0 : r;
}

function fmt(x: number, d = 1): string {
  return x.toFixed(d);
}

function runName(r: WorkbenchRun): string {
  return `run ${r.index} (${r.label})`;
}

export class BalancingWorkbench {
  private active: WorkbenchJob | null = null;
  private capture: { run: number; cap: RunCapture; by: Actor } | null = null;
  private queue: Promise<unknown> = Promise.resolve();

  constructor(private readonly deps: WorkbenchDeps) {}

  /** Reopens the most recent job left open by an earlier start. */
  async restore(): Promise<void> {
    let latest: WorkbenchJob | null = null;
    for (const id of await this.deps.store.listJobs()) {
      let rec: Partial<WorkbenchRecord> | null;
      try {
        rec = (await this.deps.store.loadJob(id)) as Partial<WorkbenchRecord> | null;
      } catch (e) {
        this.deps.logger.warn({ job_id: id, error: (e as Error).message }, 'a stored balancing job could not be read; it is left as it is');
        continue;
      }
      const wb = rec?.workbench;
      if (!wb || wb.version !== 1 || wb.status !== 'open' || wb.asset !== this.deps.config.machine.id) continue;
      if (!latest || wb.created_at > latest.created_at) latest = wb;
    }
    if (latest) {
      this.active = latest;
      this.deps.logger.info({ job_id: latest.job_id, runs: latest.runs.length }, 'open balancing job restored');
    }
  }

  get activeJob(): WorkbenchJob | null {
    return this.active;
  }

  /** Feeds a live frame to a capture in progress. */
  onLive(frame: LiveFrame, atMs: number): void {
    const c = this.capture;
    if (!c) return;
    c.cap.push(frame, atMs);
    if (c.cap.finished) {
      this.capture = null;
      void this.serial(() => this.captureFinished(c)).catch((e) => this.deps.logger.error({ error: (e as Error).message }, 'saving a captured balancing run failed'));
    } else {
      this.changed();
    }
  }

  view(job: WorkbenchJob | null = this.active): JobView | null {
    if (!job) return null;
    const s = job.setup;
    const speed = this.speedFor(job);
    const last = job.runs[job.runs.length - 1];
    const onRotor = last?.weights ?? [];
    const step = this.stepOf(job);
    const capture = this.capture && job === this.active ? this.capture.cap.progress() : null;

    let trial: JobView['trial_suggestion'] = null;
    let missing: string | null = null;
    if (s.kind !== 'trim') {
      if (s.rotor_mass_kg === null) missing = 'give the rotor mass to get a trial-weight suggestion';
      else if (speed === null) missing = 'no speed yet: the suggestion needs the running speed';
      else {
        const load = s.rotor_mass_kg / s.bearings;
        trial = s.planes.map((p) => {
          const m = suggestTrialMassG(load, p.radius_mm, speed);
          return { plane: p.name, mass_g: m, radius_mm: p.radius_mm, force_n: centrifugalForceN(m, p.radius_mm, speed), bearing_load_kg: load };
        });
      }
    }
    return {
      job,
      convention: conventionText(s.angle_convention),
      step,
      next: this.nextText(job, step),
      capture,
      weights_on_rotor: onRotor,
      speed_for_forces_rpm: speed,
      trial_suggestion: trial,
      trial_suggestion_missing: missing,
      proposals: this.proposals(job),
      cautions: balancingCautions(),
    };
  }

  // ---- actions (each validated, logged, evented and saved) ----

  async createJob(raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    const req = parseBody(createJobSchema, raw, 'job setup');
    return this.serial(async () => {
      if (this.active) throw conflict(`balancing job ${this.active.job_id} is still open`, 'finish or abandon it before starting another (one job at a time on one fan)');
      const cfg = this.deps.config;
      const bal = cfg.balance;
      const actor: Actor = { ...by, name: req.by };
      const convention = req.angle_convention ?? bal?.angle_convention ?? 'against_rotation';
      const sensorIds = cfg.sensors.map((x) => x.id);
      const sensors = req.sensors ?? cfg.sensors.filter((x) => x.direction !== 'axial').map((x) => x.id);
      const problems: string[] = [];
      sensors.forEach((id, i) => {
        if (!sensorIds.includes(id)) problems.push(`sensors[${i}]: "${id}" is not a sensor of this machine (${sensorIds.join(', ')})`);
        if (sensors.indexOf(id) !== i) problems.push(`sensors[${i}]: "${id}" is listed twice`);
      });
      let coefficientsFrom: JobSetup['coefficients_from'] = null;
      let planesIn = req.planes;
      if (req.kind === 'trim') {
        const stored = await this.deps.store.loadCoefficients();
        if (!stored) throw conflict('no influence coefficients are stored for this fan', 'do a job with trial runs first; its coefficients are kept when it is finished');
        if (stored.asset !== cfg.machine.id) throw conflict(`the stored coefficients belong to asset "${stored.asset}"`, 'a trim run needs coefficients measured on this fan');
        coefficientsFrom = { job_id: stored.job_id, saved_at: stored.saved_at, speed_rpm: stored.speed_rpm };
        planesIn ??= stored.planes.map((p) => {
          const c = bal?.planes?.[p];
          if (!c) problems.push(`planes: no radius for plane "${p}" of the stored coefficients; give planes [{name: "${p}", radius_mm: ...}] or set balance.planes.${p} in the config`);
          return { name: p, radius_mm: c?.radius_mm ?? 1, ...(c?.max_mass_g !== undefined ? { max_mass_g: c.max_mass_g } : {}), ...(c?.positions ? { positions: c.positions } : {}) };
        });
        const unknownPlanes = planesIn.filter((p) => !stored.planes.includes(p.name)).map((p) => p.name);
        if (unknownPlanes.length) problems.push(`planes: ${unknownPlanes.join(', ')} not in the stored coefficients (planes ${stored.planes.join(', ')})`);
        const noCoeff = sensors.filter((id) => !stored.coefficients[id]);
        if (noCoeff.length) problems.push(`sensors: no stored coefficients for ${noCoeff.join(', ')} (stored: ${Object.keys(stored.coefficients).join(', ')})`);
      } else {
        if (!planesIn) {
          planesIn = Object.entries(bal?.planes ?? {})
            .slice(0, PLANES_NEEDED[req.kind])
            .map(([n, p]) => ({ name: n, radius_mm: p.radius_mm, ...(p.max_mass_g !== undefined ? { max_mass_g: p.max_mass_g } : {}), ...(p.positions ? { positions: p.positions } : {}) }));
        }
        if (planesIn.length !== PLANES_NEEDED[req.kind]) {
          problems.push(`planes: a ${req.kind.replace('_', '-')} job needs ${PLANES_NEEDED[req.kind]} plane(s), ${planesIn.length} given${req.planes ? '' : ' (from the config\'s balance.planes)'}`);
        }
      }
      const planes: PlaneSetup[] = (planesIn ?? []).map((p) => ({
        name: p.name,
        radius_mm: p.radius_mm,
        max_mass_g: p.max_mass_g ?? null,
        positions: p.positions ? { count: p.positions.count, first_deg: p.positions.first_deg ?? 0 } : null,
      }));
      if (new Set(planes.map((p) => p.name)).size !== planes.length) problems.push('planes: the two planes need different names');
      if (planes.length > 0 && sensors.length < planes.length) {
        problems.push(`sensors: ${planes.length} planes need at least ${planes.length} sensors, at different bearings (${sensors.length} given)`);
      }
      const grade = req.grade !== undefined ? parseGrade(req.grade) : (bal?.grade_mm_s ?? null);
      if (problems.length) throw new ApiError(400, 'invalid_request', `${problems.length} problem(s) in the job setup: ${problems.join('; ')}`, 'fix the fields named and start the job again', problems);

      const now = this.nowIso();
      const job: WorkbenchJob = {
        version: 1,
        job_id: newJobId(cfg.machine.id, new Date(this.deps.clock.now())),
        asset: cfg.machine.id,
        status: 'open',
        created_at: now,
        created_by: actor,
        setup: {
          kind: req.kind,
          angle_convention: convention,
          planes,
          sensors,
          rotor_mass_kg: req.rotor_mass_kg ?? bal?.rotor_mass_kg ?? null,
          bearings: req.bearings ?? bal?.bearings ?? 2,
          grade_mm_s: grade,
          speed_rpm: req.speed_rpm ?? null,
          notes: req.notes ?? null,
          coefficients_from: coefficientsFrom,
        },
        runs: [],
        solution: null,
        coefficients: null,
        closed: null,
        log: [],
        counters: { trial: 0, correction: 0 },
      };
      job.runs.push(this.newRun(job, 'as_found', 'as found', [], [], now, actor, true));
      this.active = job;
      await this.record(job, actor, 'job_started', 'info', `${req.kind} job, planes ${planes.map((p) => p.name).join(', ')}, sensors ${sensors.join(', ')}, ${convention}`, {
        kind: req.kind,
        angle_convention: convention,
        planes: planes.map((p) => p.name),
        sensors,
      });
      return this.view(job)!;
    });
  }

  declareRun(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(declareRunSchema, raw, 'run', jobId, by, 'refuse', async (job, actor, req) => {
      const last = job.runs[job.runs.length - 1]!;
      if (!last.capture && !last.discarded) throw conflict(`${runName(last)} is declared but not measured yet`, 'capture it first, or discard it and declare again');
      if (req.acknowledge_cautions !== true) {
        throw badRequest('the safety cautions were not acknowledged', 'read the cautions shown with the weight change and confirm them (acknowledge_cautions: true) before anyone touches the rotor');
      }
      if (req.purpose === 'trial') {
        if (job.setup.kind === 'trim') throw conflict('a trim job uses the stored influence coefficients and has no trial runs', 'solve it from the as-found run, or start a trial-run job');
        if (job.solution?.result.ok) throw conflict('the job is already solved, so a trial run would not be used', 'declare a check run with the corrections, or abandon the job and start again');
      } else if (!job.solution?.result.ok) {
        throw conflict('a check run needs a solved job', 'solve the job first; the check run fits its corrections');
      }
      const current = this.weightsOnRotor(job);
      let keep: FittedWeight[];
      if (req.remove === 'all') keep = [];
      else if (req.remove === 'all_trials') keep = current.filter((w) => w.role !== 'trial');
      else {
        const unknown = req.remove.filter((id) => !current.some((w) => w.id === id));
        if (unknown.length) {
          throw badRequest(`remove: ${unknown.map((u) => `"${u}"`).join(', ')} is not on the rotor (on it now: ${current.map((w) => w.id).join(', ') || 'none'})`, 'name weights by the ids the job gave them');
        }
        keep = current.filter((w) => !req.remove.includes(w.id));
      }
      const problems: string[] = [];
      const added: FittedWeight[] = req.add.map((a, i) => {
        const plane = job.setup.planes.find((p) => p.name === a.plane);
        if (!plane) {
          problems.push(`add[${i}].plane: "${a.plane}" is not a plane of this job (${job.setup.planes.map((p) => p.name).join(', ')})`);
          return null;
        }
        if (plane.max_mass_g !== null && a.mass_g > plane.max_mass_g) {
          problems.push(
            `add[${i}].mass_g: ${fmt(a.mass_g)} g is more than the ${fmt(plane.max_mass_g)} g plane ${plane.name} takes; split it onto two positions or fit it at a larger radius (mass x r_old / r_new)`,
          );
        }
        const role = req.purpose === 'trial' ? 'trial' : 'correction';
        const n = role === 'trial' ? ++job.counters.trial : ++job.counters.correction;
        return { id: `${role === 'trial' ? 'T' : 'C'}${n}`, role, plane: plane.name, mass_g: a.mass_g, angle_deg: wrap360(a.angle_deg), radius_mm: a.radius_mm ?? plane.radius_mm } as FittedWeight;
      }).filter((w): w is FittedWeight => w !== null);
      if (problems.length) {
        // Give back the ids handed out for a refused request.
        job.counters = this.countersOf(job);
        throw new ApiError(400, 'invalid_request', `${problems.length} problem(s) in the weights: ${problems.join('; ')}`, 'change the weights and send the run again', problems);
      }
      const weights = [...keep, ...added];
      const speed = this.speedFor(job);
      const force = (w: FittedWeight) => (speed === null ? null : centrifugalForceN(w.mass_g, w.radius_mm, speed));
      const changes: WeightChange[] = [
        ...current.filter((w) => !keep.includes(w)).map((w) => ({ action: 'remove' as const, weight: w, force_n: force(w) })),
        ...added.map((w) => ({ action: 'fit' as const, weight: w, force_n: force(w) })),
      ];
      const nTrial = job.runs.filter((r) => r.purpose === 'trial').length + 1;
      const nCheck = job.runs.filter((r) => r.purpose === 'check').length + 1;
      const label = req.label ?? (req.purpose === 'trial' ? `trial ${nTrial}` : nCheck === 1 ? 'check' : `check ${nCheck}`);
      const run = this.newRun(job, req.purpose, label, weights, changes, this.nowIso(), actor, true);
      job.runs.push(run);
      if (req.purpose === 'trial') job.solution = null; // a failed attempt is out of date once a run is added
      const what = changes.map((c) => `${c.action} ${c.weight.id} ${fmt(c.weight.mass_g)} g at ${fmt(c.weight.angle_deg)} deg in ${c.weight.plane}`).join('; ') || 'no weight change';
      await this.record(job, actor, 'weights_changed', 'info', `${runName(run)}: ${what}; cautions acknowledged`, {
        run: run.index,
        label,
        changes: changes.map((c) => ({ action: c.action, ...c.weight, force_n: c.force_n })),
        weights_on_rotor: weights,
        angle_convention: job.setup.angle_convention,
      });
    });
  }

  startCapture(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(captureSchema, raw, 'capture request', jobId, by, 'refuse', async (job, actor, req) => {
      const last = job.runs[job.runs.length - 1]!;
      if (last.discarded) throw conflict(`${runName(last)} was discarded`, 'declare the next run first');
      if (last.capture && job.solution?.result.ok && last.purpose !== 'check') {
        throw conflict(`${runName(last)} is measured and the job was solved from it`, 'declare the check run next');
      }
      if (last.purpose !== 'check') job.solution = null; // a failed attempt is out of date once a run changes
      const settings: CaptureSettings = { ...this.deps.capture, revolutions: req.revolutions ?? this.deps.capture.revolutions };
      this.capture = { run: last.index, cap: new RunCapture(job.setup.sensors, settings), by: actor };
      await this.record(job, actor, 'capture_started', 'info', `${runName(last)}${last.capture ? ' (repeat)' : ''}: ${settings.settleRevolutions} revolutions to settle, ${settings.revolutions} averaged`, {
        run: last.index,
        label: last.label,
        settle_revolutions: settings.settleRevolutions,
        revolutions: settings.revolutions,
      });
    });
  }

  cancelCapture(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(byOnlySchema, raw, 'request', jobId, by, 'allow', async (job, actor) => {
      const c = this.capture;
      if (!c) throw conflict('no capture is running', 'nothing to cancel');
      this.capture = null;
      const run = job.runs[c.run]!;
      run.capture_failures.push({ at: this.nowIso(), why: `cancelled by ${actor.name}` });
      await this.record(job, actor, 'capture_cancelled', 'info', `${runName(run)}: capture cancelled`, { run: run.index });
    });
  }

  discardRun(jobId: string, index: number, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(reasonSchema, raw, 'discard request', jobId, by, 'refuse', async (job, actor, req) => {
      const run = job.runs[index];
      if (!run) throw new ApiError(404, 'not_found', `job ${job.job_id} has no run ${index}`, `runs are numbered 0-${job.runs.length - 1}`);
      if (run.purpose === 'as_found') throw conflict('the as-found run cannot be discarded', 'repeat its capture instead, or abandon the job');
      if (run.discarded) throw conflict(`${runName(run)} is already discarded`, 'nothing to do');
      if (run.purpose === 'trial' && job.solution?.result.ok) throw conflict(`the job was solved with ${runName(run)}`, 'abandon the job and start again to change the trial runs');
      if (run.purpose === 'trial') job.solution = null;
      const last = index === job.runs.length - 1;
      if (!run.capture && last) {
        job.runs.pop();
        job.counters = this.countersOf(job);
        await this.record(job, actor, 'run_withdrawn', 'info', `${runName(run)} withdrawn before it was measured: ${req.reason}`, { run: index, reason: req.reason });
      } else {
        run.discarded = { at: this.nowIso(), by: actor, reason: req.reason };
        await this.record(job, actor, 'run_discarded', 'info', `${runName(run)} left out of the solution: ${req.reason}`, { run: index, reason: req.reason });
      }
    });
  }

  solve(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(byOnlySchema, raw, 'request', jobId, by, 'refuse', async (job, actor) => {
      if (job.runs.some((r) => r.purpose === 'check')) throw conflict('the correction is already being checked', 'finish the job, or abandon it and start again to solve anew');
      const pending = job.runs.find((r) => !r.capture && !r.discarded);
      if (pending) throw conflict(`${runName(pending)} is not measured yet`, 'capture it (or discard it) before solving');
      let stored: StoredCoefficients | null = null;
      if (job.setup.kind === 'trim') {
        stored = await this.deps.store.loadCoefficients();
        if (!stored) throw conflict('the stored influence coefficients are gone', 'abandon this trim job and do one with trial runs');
      } else {
        const trials = job.runs.filter((r) => r.purpose === 'trial' && !r.discarded).length;
        if (trials < TRIALS_NEEDED[job.setup.kind]) {
          throw conflict(`a ${job.setup.kind.replace('_', '-')} job needs ${TRIALS_NEEDED[job.setup.kind]} trial run(s); ${trials} measured`, 'declare and capture the next trial run');
        }
      }
      let balanceJob = this.balanceJob(job);
      if (stored) {
        try {
          balanceJob = { ...balanceJob, influence_coefficients: coefficientsForJob(stored, balanceJob, 'stored influence coefficients'), coefficients_speed_rpm: stored.speed_rpm };
        } catch (e) {
          if (isUserError(e)) throw badRequest(e.message, e.hint);
          throw e;
        }
      }
      const result = solveBalanceJob(balanceJob);
      job.solution = { at: this.nowIso(), by: actor, job: balanceJob, result };
      const summary = result.ok
        ? `corrections ${result.corrections.map((c) => `${c.plane} ${fmt(c.mass_g)} g at ${fmt(c.angle_deg)} deg`).join(', ')}`
        : `no correction: ${result.problems.map((p) => p.message).join('; ')}`;
      await this.record(job, actor, 'job_solved', result.ok ? 'info' : 'warning', summary, {
        ok: result.ok,
        angle_convention: result.angle_convention,
        corrections: result.corrections,
        condition_number: result.condition_number,
        warnings: result.warnings.map((w) => w.code),
        problems: result.problems.map((p) => p.code),
      });
    });
  }

  finish(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(finishSchema, raw, 'finish request', jobId, by, 'refuse', async (job, actor, req) => {
      if (!job.solution?.result.ok) throw conflict('the job has no correction to keep', 'solve it first (with enough good runs), or abandon it');
      const pending = job.runs.find((r) => !r.capture && !r.discarded);
      if (pending) throw conflict(`${runName(pending)} is declared but not measured`, 'capture it or discard it first');
      job.status = 'finished';
      job.closed = { at: this.nowIso(), by: actor, note: req.note ?? null };
      const exp = exportCoefficients(job.solution.job, job.solution.result, { asset: job.asset, jobId: job.job_id, savedAt: job.closed.at });
      if ('coefficients' in exp) {
        await this.deps.store.saveCoefficients(exp.coefficients);
        job.coefficients = { saved: true, reason: null };
      } else {
        job.coefficients = { saved: false, reason: exp.reason };
      }
      const left = this.weightsOnRotor(job);
      await this.record(job, actor, 'job_finished', 'info', `finished; weights on the rotor: ${left.map((w) => `${w.id} ${fmt(w.mass_g)} g at ${fmt(w.angle_deg)} deg in ${w.plane}`).join(', ') || 'none'}; coefficients ${job.coefficients.saved ? 'kept for the watcher' : `not kept (${job.coefficients.reason})`}`, {
        weights_on_rotor: left,
        coefficients_saved: job.coefficients.saved,
        ...(job.coefficients.reason ? { coefficients_not_saved: job.coefficients.reason } : {}),
      });
      this.active = null;
      if (job.coefficients.saved) {
        try {
          this.deps.onCoefficientsSaved?.();
        } catch (e) {
          this.deps.logger.error({ error: (e as Error).message }, 'reloading the stored influence coefficients failed');
        }
      }
      this.changed();
    });
  }

  abandon(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(reasonSchema, raw, 'abandon request', jobId, by, 'allow', async (job, actor, req) => {
      if (this.capture) this.capture = null;
      job.status = 'abandoned';
      job.closed = { at: this.nowIso(), by: actor, note: req.reason };
      const left = this.weightsOnRotor(job);
      await this.record(job, actor, 'job_abandoned', left.length ? 'warning' : 'info', `abandoned: ${req.reason}${left.length ? `; STILL ON THE ROTOR: ${left.map((w) => `${w.id} ${fmt(w.mass_g)} g at ${fmt(w.angle_deg)} deg in ${w.plane}`).join(', ')}` : ''}`, {
        reason: req.reason,
        weights_on_rotor: left,
      });
      this.active = null;
      this.changed();
    });
  }

  /** A job by id: the open one from memory, others from the store. */
  async getJob(jobId: string): Promise<WorkbenchJob> {
    if (this.active?.job_id === jobId) return this.active;
    const rec = (await this.loadRecord(jobId)) as Partial<WorkbenchRecord>;
    if (!rec.workbench) throw new ApiError(404, 'not_found', `job ${jobId} was recorded by the command line, not the workbench`, `read it with \`turnwise balance export ${jobId}\``);
    return rec.workbench;
  }

  /** The saved record of a job, for export. */
  async exportJob(jobId: string): Promise<BalanceJobRecord> {
    if (this.active?.job_id === jobId) return this.recordOf(this.active);
    return this.loadRecord(jobId);
  }

  async listJobs(): Promise<Array<{ job_id: string; status: string; kind: string | null; created_at: string | null; created_by: string | null; saved_at: string }>> {
    const out = [];
    for (const id of await this.deps.store.listJobs()) {
      try {
        const rec = (await this.deps.store.loadJob(id)) as Partial<WorkbenchRecord> | null;
        if (!rec) continue;
        const wb = rec.workbench;
        out.push({
          job_id: id,
          status: wb?.status ?? (rec.result?.ok ? 'solved (command line)' : 'recorded (command line)'),
          kind: wb?.setup.kind ?? null,
          created_at: wb?.created_at ?? null,
          created_by: wb?.created_by.name ?? rec.recorded_by ?? null,
          saved_at: rec.saved_at ?? '',
        });
      } catch (e) {
        this.deps.logger.warn({ job_id: id, error: (e as Error).message }, 'a stored balancing job could not be read');
      }
    }
    return out.sort((a, b) => (a.saved_at < b.saved_at ? 1 : -1));
  }

  /** For the MQTT `balancing.session` command: start a job, report the open one, or abandon it. */
  async sessionCommand(args: { action: 'start' | 'status' | 'abort'; params?: Record<string, unknown> }): Promise<Record<string, unknown>> {
    const by = { token: 'mqtt-command', role: 'command' as const };
    const summary = (v: JobView | null) =>
      v ? { job_id: v.job.job_id, status: v.job.status, kind: v.job.setup.kind, step: v.step, next: v.next, runs: v.job.runs.length, angle_convention: v.job.setup.angle_convention } : { job_id: null, status: 'none' };
    try {
      if (args.action === 'status') return summary(this.view());
      if (args.action === 'start') return summary(await this.createJob(args.params ?? {}, by));
      const job = this.active;
      if (!job) return { job_id: null, status: 'none', note: 'no balancing job was open' };
      const reason = typeof args.params?.reason === 'string' ? args.params.reason : 'aborted by a plant command';
      const name = typeof args.params?.by === 'string' ? args.params.by : 'plant command';
      return summary(await this.abandon(job.job_id, { reason, by: name }, by));
    } catch (e) {
      if (e instanceof ApiError) throw new UserError('balancing.session', e.message, e.hint);
      throw e;
    }
  }

  // ---- internals ----

  /** One action on the open job: the body checked, run in turn with the others, the job's view returned. */
  private async step<T extends { by?: string }>(
    schema: z.ZodType<T>,
    raw: unknown,
    what: string,
    jobId: string,
    by: Omit<Actor, 'name'>,
    duringCapture: 'refuse' | 'allow',
    body: (job: WorkbenchJob, actor: Actor, req: T) => Promise<void>,
  ): Promise<JobView> {
    const req = parseBody(schema, raw ?? {}, what);
    return this.serial(async () => {
      const job = this.openJob(jobId);
      const actor = this.actor(job, by, req.by);
      if (duringCapture === 'refuse') this.noCapture(job);
      await body(job, actor, req);
      return this.view(job)!;
    });
  }

  private serial<T>(fn: () => Promise<T>): Promise<T> {
    const next = this.queue.then(fn, fn);
    this.queue = next.catch(() => undefined);
    return next;
  }

  private nowIso(): string {
    return new Date(this.deps.clock.now()).toISOString();
  }

  private changed(): void {
    try {
      this.deps.onChange?.(this.view());
    } catch (e) {
      this.deps.logger.error({ error: (e as Error).message }, 'a workbench listener failed');
    }
  }

  private openJob(jobId: string): WorkbenchJob {
    const job = this.active;
    if (!job || job.job_id !== jobId) {
      throw conflict(job ? `job ${jobId} is not the open job (${job.job_id} is)` : `job ${jobId} is not open (no job is)`, 'only the open job can be changed; finished and abandoned jobs are read only');
    }
    return job;
  }

  private noCapture(job: WorkbenchJob): void {
    if (this.capture) throw conflict(`${runName(job.runs[this.capture.run]!)} is being captured`, 'wait for the capture to finish, or cancel it');
  }

  private actor(job: WorkbenchJob, by: Omit<Actor, 'name'>, name: string | undefined): Actor {
    return { ...by, name: name ?? job.created_by.name };
  }

  private countersOf(job: WorkbenchJob): { trial: number; correction: number } {
    const all = job.runs.flatMap((r) => r.weights);
    const max = (p: string) => all.filter((w) => w.id.startsWith(p)).reduce((m, w) => Math.max(m, Number(w.id.slice(1))), 0);
    return { trial: max('T'), correction: max('C') };
  }

  private newRun(job: WorkbenchJob, purpose: WorkbenchRun['purpose'], label: string, weights: FittedWeight[], changes: WeightChange[], at: string, by: Actor, ack: boolean): WorkbenchRun {
    return {
      index: job.runs.length,
      label,
      purpose,
      weights,
      changes,
      declared_at: at,
      declared_by: by,
      cautions_acknowledged: ack,
      capture: null,
      earlier_captures: [],
      capture_failures: [],
      trial_check: null,
      residual: null,
      discarded: null,
    };
  }

  private weightsOnRotor(job: WorkbenchJob): FittedWeight[] {
    return [...(job.runs[job.runs.length - 1]?.weights ?? [])];
  }

  private speedFor(job: WorkbenchJob): number | null {
    return job.setup.speed_rpm ?? job.runs[0]?.capture?.speed_rpm ?? this.deps.liveSpeed() ?? this.deps.config.machine.rated_rpm ?? null;
  }

  private stepOf(job: WorkbenchJob): JobStep {
    if (job.status !== 'open') return 'closed';
    const last = job.runs[job.runs.length - 1]!;
    if (!last.capture && !last.discarded) return 'capture';
    if (!job.solution?.result.ok) {
      const trials = job.runs.filter((r) => r.purpose === 'trial' && !r.discarded && r.capture).length;
      return trials < TRIALS_NEEDED[job.setup.kind] ? 'trial' : 'solve';
    }
    return job.runs.some((r) => r.purpose === 'check' && r.capture && !r.discarded) ? 'check' : 'correct';
  }

  private nextText(job: WorkbenchJob, step: JobStep): string {
    const last = job.runs[job.runs.length - 1]!;
    switch (step) {
      case 'closed':
        return `this job is ${job.status}`;
      case 'capture':
        return `bring the fan to steady speed and capture ${runName(last)}`;
      case 'trial': {
        const n = job.runs.filter((r) => r.purpose === 'trial' && !r.discarded && r.capture).length + 1;
        if (job.setup.kind === 'static_couple') return n === 1 ? 'declare trial 1: a static pair (equal weights at the same angle in both planes)' : 'declare trial 2: a couple pair (equal weights 180 degrees apart)';
        return job.setup.planes.length === 1 ? 'declare the trial run: one trial weight in the plane' : `declare trial ${n}: a trial weight in plane ${job.setup.planes[n - 1]?.name ?? ''}`;
      }
      case 'solve':
        return job.setup.kind === 'trim' ? 'solve from the stored influence coefficients' : 'solve for the correction weights (or add another trial run)';
      case 'correct':
        return 'fit the correction weights and declare the check run';
      case 'check':
        return 'look at the residual: finish the job, or fit the trim weights and check again';
    }
  }

  private splitOf(plane: PlaneSetup, w: { mass_g: number; angle_deg: number; radius_mm: number }): SplitPart[] | null {
    return plane.positions ? splitOntoPositions(w.mass_g, w.angle_deg, plane.positions) : null;
  }

  private proposalFrom(job: WorkbenchJob, title: string, remove: ProposedChange['remove'], weights: readonly PlaneWeight[]): ProposedChange {
    const add = weights.filter((w) => w.mass_g > 0).map((w) => ({ plane: w.plane, mass_g: w.mass_g, angle_deg: wrap360(w.angle_deg), radius_mm: job.setup.planes.find((p) => p.name === w.plane)!.radius_mm }));
    const anyPositions = job.setup.planes.some((p) => p.positions);
    const add_split = anyPositions
      ? add.flatMap((a) => {
          const plane = job.setup.planes.find((p) => p.name === a.plane)!;
          const parts = this.splitOf(plane, a);
          return parts ? parts.filter((p) => p.mass_g > 0.005).map((p) => ({ plane: a.plane, mass_g: p.mass_g, angle_deg: p.angle_deg, radius_mm: a.radius_mm, position: p.position })) : [{ ...a, position: -1 }];
        })
      : null;
    return { title, remove, add, add_split };
  }

  private proposals(job: WorkbenchJob): ProposedChange[] {
    if (job.status !== 'open' || !job.solution?.result.ok) return [];
    const r = job.solution.result;
    const checks = job.runs.filter((x) => x.purpose === 'check' && x.capture && !x.discarded);
    const lastRun = job.runs[job.runs.length - 1]!;
    if (checks.length && lastRun.residual && lastRun.purpose === 'check') {
      return [this.proposalFrom(job, 'add the trim weights, leaving the weights now on the rotor', [], lastRun.residual.trim)];
    }
    if (checks.length) return [];
    const trialsOn = this.weightsOnRotor(job).some((w) => w.role === 'trial');
    const out = [this.proposalFrom(job, trialsOn ? 'take the trial weights off and fit the corrections' : 'fit the corrections', trialsOn ? 'all_trials' : [], r.corrections)];
    if (trialsOn) out.push(this.proposalFrom(job, 'leave the trial weights on and add these', [], r.corrections_trials_left_in));
    return out;
  }

  /** The job as the solver sees it: as found plus the measured trial runs that are not discarded. */
  private balanceJob(job: WorkbenchJob): BalanceJob {
    const s = job.setup;
    const planeRadius = new Map(s.planes.map((p) => [p.name, p.radius_mm]));
    const runs: JobRun[] = job.runs
      .filter((r) => r.capture && !r.discarded && (r.purpose === 'as_found' || (r.purpose === 'trial' && s.kind !== 'trim')))
      .map((r) => ({
        label: r.label,
        speed_rpm: r.capture!.speed_rpm,
        weights: r.weights.map((w) => ({ plane: w.plane, mass_g: (w.mass_g * w.radius_mm) / planeRadius.get(w.plane)!, angle_deg: w.angle_deg })),
        readings: Object.fromEntries(Object.entries(r.capture!.readings).map(([id, v]) => [id, { amp: v.amp_pk_mm_s, phase_deg: v.phase_deg }])),
      }));
    const maxMass = Object.fromEntries(s.planes.filter((p) => p.max_mass_g !== null).map((p) => [p.name, p.max_mass_g!]));
    return {
      job_id: job.job_id,
      asset: job.asset,
      angle_convention: s.angle_convention,
      planes: s.planes.map((p) => p.name),
      runs,
      amp_unit: AMP_UNIT,
      radius_mm: Object.fromEntries(planeRadius),
      ...(Object.keys(maxMass).length ? { max_mass_g: maxMass } : {}),
      ...(s.rotor_mass_kg !== null ? { rotor_mass_kg: s.rotor_mass_kg } : {}),
      ...(s.grade_mm_s !== null ? { grade_mm_s: s.grade_mm_s } : {}),
      ...(s.notes ? { notes: s.notes } : {}),
    };
  }

  private async captureFinished(c: { run: number; cap: RunCapture; by: Actor }): Promise<void> {
    const job = this.active;
    if (!job) return;
    const run = job.runs[c.run];
    if (!run) return;
    const at = this.nowIso();
    const result = c.cap.result;
    if (!result) {
      const why = c.cap.failed ?? 'the capture ended without a result';
      run.capture_failures.push({ at, why });
      await this.record(job, c.by, 'capture_failed', 'warning', `${runName(run)}: ${why}`, { run: run.index, why });
      return;
    }
    if (run.capture) run.earlier_captures.push(run.capture);
    run.capture = { ...result, at, by: c.by };
    const asFound = job.runs[0]!.capture;
    if (run.purpose === 'trial' && asFound) {
      run.trial_check = job.setup.sensors.map((sensor) => {
        const a = asFound.readings[sensor]!;
        const b = result.readings[sensor]!;
        return { sensor, ...trialMove({ amp: a.amp_pk_mm_s, phase_deg: a.phase_deg }, { amp: b.amp_pk_mm_s, phase_deg: b.phase_deg }) };
      });
    }
    if (run.purpose === 'check' && asFound && job.solution) run.residual = this.residual(job, run);
    const text = job.setup.sensors.map((s) => `${s} ${fmt(result.readings[s]!.amp_pk_mm_s, 2)} mm/s pk at ${fmt(result.readings[s]!.phase_deg)} deg`).join(', ');
    await this.record(job, c.by, 'run_captured', 'info', `${runName(run)} at ${fmt(result.speed_rpm, 0)} r/min over ${fmt(result.revolutions, 0)} revolutions: ${text}`, {
      run: run.index,
      label: run.label,
      speed_rpm: result.speed_rpm,
      revolutions: result.revolutions,
      readings: result.readings,
      notes: result.notes,
      ...(run.trial_check ? { moved_enough: run.trial_check.some((t) => t.moved_enough) } : {}),
      ...(run.residual ? { residual_pct_of_as_found: Math.max(...run.residual.sensors.map((x) => x.pct_of_as_found)) } : {}),
    });
  }

  /** The check run against as found, and through the job's coefficients as residual unbalance and trim weights. */
  private residual(job: WorkbenchJob, run: WorkbenchRun): ResidualReport {
    const sol = job.solution!;
    const asFound = job.runs[0]!.capture!;
    const cap = run.capture!;
    const coeffs: Record<string, Record<string, CoefficientValue>> = {};
    for (const c of sol.result.influence_coefficients) (coeffs[c.sensor] ??= {})[c.plane] = { amp_per_g: c.amp_per_g, phase_deg: c.phase_deg };
    const trimJob: BalanceJob = {
      ...sol.job,
      runs: [{ label: run.label, speed_rpm: cap.speed_rpm, weights: [], readings: Object.fromEntries(job.setup.sensors.map((s) => [s, { amp: cap.readings[s]!.amp_pk_mm_s, phase_deg: cap.readings[s]!.phase_deg }])) }],
      influence_coefficients: coeffs,
      ...(sol.result.speed_rpm !== null ? { coefficients_speed_rpm: sol.result.speed_rpm } : {}),
    };
    const r = solveBalanceJob(trimJob);
    const u = r.unbalance;
    const s = job.setup;
    const per = s.rotor_mass_kg !== null && s.grade_mm_s !== null ? permissibleUnbalanceGmm(s.grade_mm_s, s.rotor_mass_kg, cap.speed_rpm) : null;
    const perPlane = per === null ? null : per / s.planes.length;
    return {
      sensors: job.setup.sensors.map((sensor) => {
        const a = asFound.readings[sensor]!.amp_pk_mm_s;
        const b = cap.readings[sensor]!;
        return { sensor, as_found_pk_mm_s: a, amp_pk_mm_s: b.amp_pk_mm_s, phase_deg: b.phase_deg, pct_of_as_found: a > 0 ? (b.amp_pk_mm_s / a) * 100 : 0 };
      }),
      unbalance_g_mm: u ? u.as_found_g_mm : null,
      permissible_g_mm: per,
      permissible_per_plane_g_mm: perPlane,
      within_grade: u && perPlane !== null ? Object.values(u.as_found_g_mm).every((x) => x <= perPlane) : null,
      trim: r.ok ? r.corrections : [],
      warnings: [...r.warnings, ...r.problems],
    };
  }

  private recordOf(job: WorkbenchJob): WorkbenchRecord {
    const savedAt = this.nowIso();
    let solved = job.solution;
    if (!solved && job.runs[0]?.capture) {
      const bj = this.balanceJob(job);
      solved = { at: savedAt, by: job.created_by, job: bj, result: solveBalanceJob(bj) };
    }
    const bj: BalanceJob = solved?.job ?? { job_id: job.job_id, asset: job.asset, angle_convention: job.setup.angle_convention, planes: job.setup.planes.map((p) => p.name), runs: [], amp_unit: AMP_UNIT };
    const result: BalanceResult = solved?.result ?? {
      ok: false,
      angle_convention: job.setup.angle_convention,
      convention: conventionText(job.setup.angle_convention),
      amp_unit: AMP_UNIT,
      planes: bj.planes,
      sensors: [...job.setup.sensors],
      method: null,
      corrections: [],
      corrections_trials_left_in: [],
      static_couple: null,
      influence_coefficients: [],
      as_found: [],
      predicted_residuals: [],
      trial_checks: [],
      condition_number: null,
      trial_condition_number: null,
      speed_rpm: null,
      unbalance: null,
      warnings: [],
      problems: [{ code: 'no_runs', message: 'the as-found run is not measured yet', hint: 'capture the as-found run' }],
    };
    return { version: 1, job_id: job.job_id, asset: job.asset, recorded_by: job.created_by.name, saved_at: savedAt, angle_convention: job.setup.angle_convention, job: bj, result, workbench: job };
  }

  private async loadRecord(jobId: string): Promise<BalanceJobRecord> {
    let rec: BalanceJobRecord | null;
    try {
      rec = await this.deps.store.loadJob(jobId);
    } catch (e) {
      if (isUserError(e)) throw new ApiError(e.where.startsWith('job id') ? 400 : 500, e.where.startsWith('job id') ? 'invalid_request' : 'store_error', e.message, e.hint);
      throw e;
    }
    if (!rec) throw new ApiError(404, 'not_found', `no balancing job ${jobId}`, 'list the jobs with GET /api/jobs');
    return rec;
  }

  private log(job: WorkbenchJob, by: Actor, action: string, detail: string): void {
    job.log.push({ at: this.nowIso(), by, action, detail });
  }

  /** Logs, saves, events and announces one action. The event goes out after the record is saved. */
  private async record(job: WorkbenchJob, by: Actor, action: string, severity: AgentEvent['severity'], detail: string, fields: Record<string, unknown>): Promise<void> {
    this.log(job, by, action, detail);
    const at = job.log[job.log.length - 1]!.at;
    const logFields = { job_id: job.job_id, action, by: by.name, token: by.token, role: by.role };
    if (severity === 'info') this.deps.logger.info(logFields, `balancing: ${detail}`);
    else this.deps.logger.warn(logFields, `balancing: ${detail}`);
    try {
      await this.deps.store.saveJob(this.recordOf(job));
    } catch (e) {
      this.deps.logger.error({ job_id: job.job_id, error: (e as Error).message }, 'saving the balancing job failed; it is kept in memory and saved again with the next action');
    }
    const type = `balancing_${action}`;
    const event: AgentEvent = {
      id: `${job.asset}/${type}/${job.job_id}/${job.log.length}`,
      ts: at,
      asset: job.asset,
      type,
      severity,
      job_id: job.job_id,
      by: { name: by.name, token: by.token, role: by.role },
      detail,
      ...fields,
    };
    try {
      await this.deps.emit(event);
    } catch (e) {
      this.deps.logger.error({ job_id: job.job_id, type, error: (e as Error).message }, 'a balancing event could not be handed to the outputs');
    }
    this.changed();
  }
}
