/**
 * The balancing workbench's actions: one balancing job at a time on this fan, run by an operator
 * step by step (records.ts describes a job). The maths is agent/balance's (solveBalanceJob,
 * trialMove, the weight arithmetic); this module keeps the open job, captures each run from the
 * live 1x vectors, checks every request against the state of the job, and records everything (who,
 * when, what) through the balancing store, so a restart loses nothing but a capture in progress.
 * Every action is validated, logged, evented and saved, one at a time. The live server's HTTP
 * routes and the MQTT `balancing.session` command call these actions; they hold no logic of their
 * own.
 */
import type { SweepEvidence } from '../../watcher/rules/types.js';
import type { z } from 'zod';
import type { Clock } from '../../clock.js';
import type { Config } from '../../config/schema.js';
import type { LiveFrame } from '../../dsp/types.js';
import { isUserError, UserError } from '../../errors.js';
import type { AgentEvent } from '../../events.js';
import type { Logger } from '../../log.js';
import type { StoredCoefficients } from '../coefficients.js';
import { exportCoefficients, coefficientsForJob } from '../record.js';
import { solveBalanceJob } from '../solve.js';
import { newJobId, type BalanceJobRecord, type BalanceStore } from '../store.js';
import { centrifugalForceN } from '../weights.js';
import { RunCapture, type CaptureSettings } from './capture.js';
import {
  balanceJobOf,
  countersOf,
  fmt,
  newRun,
  recordOf,
  residualOf,
  runName,
  trialCheckOf,
  TRIALS_NEEDED,
  weightsOnRotor,
  wrap360,
  type Actor,
  type FittedWeight,
  type WeightChange,
  type WorkbenchJob,
  type WorkbenchRecord,
} from './records.js';
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
} from './requests.js';
import { jobSetupFrom } from './setup.js';
import { jobView, ratedRpmOf, speedFor, type JobView } from './view.js';

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
  /**
   * Resonances of the last recorded run-up or coast-down (agent/sweep), for the warning near one.
   */
  readonly sweepEvidence?: () => SweepEvidence | null;
  /** Told whenever the open job changes (also on capture progress). */
  readonly onChange?: (view: JobView | null) => void;
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
        this.deps.logger.warn(
          { job_id: id, error: (e as Error).message },
          'a stored balancing job could not be read; it is left as it is',
        );
        continue;
      }
      const wb = rec?.workbench;
      if (
        !wb ||
        wb.version !== 1 ||
        wb.status !== 'open' ||
        wb.asset !== this.deps.config.machine.id
      )
        continue;
      if (!latest || wb.created_at > latest.created_at) latest = wb;
    }
    if (latest) {
      this.active = latest;
      this.deps.logger.info(
        { job_id: latest.job_id, runs: latest.runs.length },
        'open balancing job restored',
      );
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
      void this.serial(() => this.captureFinished(c)).catch((e) =>
        this.deps.logger.error(
          { error: (e as Error).message },
          'saving a captured balancing run failed',
        ),
      );
    } else {
      this.changed();
    }
  }

  view(job: WorkbenchJob | null = this.active): JobView | null {
    if (!job) return null;
    const capture = this.capture && job === this.active ? this.capture.cap.progress() : null;
    return jobView(job, {
      capture,
      liveSpeedRpm: this.deps.liveSpeed(),
      ratedRpm: ratedRpmOf(this.deps.config),
      sweep: this.deps.sweepEvidence?.() ?? null,
    });
  }

  // ---- actions (each validated, logged, evented and saved) ----

  async createJob(raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    const req = parseBody(createJobSchema, raw, 'job setup');
    return this.serial(async () => {
      if (this.active)
        throw conflict(
          `balancing job ${this.active.job_id} is still open`,
          'finish or abandon it before starting another (one job at a time on one fan)',
        );
      const cfg = this.deps.config;
      const actor: Actor = { ...by, name: req.by };
      const stored = req.kind === 'trim' ? await this.deps.store.loadCoefficients() : null;
      const setup = jobSetupFrom(req, cfg, stored);
      const { planes, sensors, angle_convention: convention } = setup;

      const now = this.nowIso();
      const job: WorkbenchJob = {
        version: 1,
        job_id: newJobId(cfg.machine.id, new Date(this.deps.clock.now())),
        asset: cfg.machine.id,
        status: 'open',
        created_at: now,
        created_by: actor,
        setup,
        runs: [],
        solution: null,
        coefficients: null,
        closed: null,
        log: [],
        counters: { trial: 0, correction: 0 },
      };
      job.runs.push(newRun(job, 'as_found', 'as found', [], [], now, actor, true));
      this.active = job;
      await this.record(
        job,
        actor,
        'job_started',
        'info',
        `${req.kind} job, planes ${planes.map((p) => p.name).join(', ')}, sensors ` +
          `${sensors.join(', ')}, ${convention}`,
        {
          kind: req.kind,
          angle_convention: convention,
          planes: planes.map((p) => p.name),
          sensors,
        },
      );
      return this.view(job)!;
    });
  }

  declareRun(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(declareRunSchema, raw, 'run', jobId, by, 'refuse', async (job, actor, req) => {
      const last = job.runs[job.runs.length - 1]!;
      if (!last.capture && !last.discarded)
        throw conflict(
          `${runName(last)} is declared but not measured yet`,
          'capture it first, or discard it and declare again',
        );
      if (req.acknowledge_cautions !== true) {
        throw badRequest(
          'the safety cautions were not acknowledged',
          'read the cautions shown with the weight change and confirm them ' +
            '(acknowledge_cautions: true) before anyone touches the rotor',
        );
      }
      if (req.purpose === 'trial') {
        if (job.setup.kind === 'trim')
          throw conflict(
            'a trim job uses the stored influence coefficients and has no trial runs',
            'solve it from the as-found run, or start a trial-run job',
          );
        if (job.solution?.result.ok)
          throw conflict(
            'the job is already solved, so a trial run would not be used',
            'declare a check run with the corrections, or abandon the job and start again',
          );
      } else if (!job.solution?.result.ok) {
        throw conflict(
          'a check run needs a solved job',
          'solve the job first; the check run fits its corrections',
        );
      }
      const current = weightsOnRotor(job);
      let keep: FittedWeight[];
      if (req.remove === 'all') keep = [];
      else if (req.remove === 'all_trials') keep = current.filter((w) => w.role !== 'trial');
      else {
        const unknown = req.remove.filter((id) => !current.some((w) => w.id === id));
        if (unknown.length) {
          throw badRequest(
            `remove: ${unknown.map((u) => `"${u}"`).join(', ')} is not on the ` +
              `rotor (on it now: ${current.map((w) => w.id).join(', ') || 'none'})`,
            'name weights by the ids the job gave them',
          );
        }
        keep = current.filter((w) => !req.remove.includes(w.id));
      }
      const problems: string[] = [];
      const added: FittedWeight[] = req.add
        .map((a, i) => {
          const plane = job.setup.planes.find((p) => p.name === a.plane);
          if (!plane) {
            problems.push(
              `add[${i}].plane: "${a.plane}" is not a plane of this ` +
                `job (${job.setup.planes.map((p) => p.name).join(', ')})`,
            );
            return null;
          }
          if (plane.max_mass_g !== null && a.mass_g > plane.max_mass_g) {
            problems.push(
              `add[${i}].mass_g: ${fmt(a.mass_g)} g is more than the ` +
                `${fmt(plane.max_mass_g)} g plane ${plane.name} takes; split it onto ` +
                `two positions or fit it at a larger radius (mass x r_old / r_new)`,
            );
          }
          const role = req.purpose === 'trial' ? 'trial' : 'correction';
          const n = role === 'trial' ? ++job.counters.trial : ++job.counters.correction;
          return {
            id: `${role === 'trial' ? 'T' : 'C'}${n}`,
            role,
            plane: plane.name,
            mass_g: a.mass_g,
            angle_deg: wrap360(a.angle_deg),
            radius_mm: a.radius_mm ?? plane.radius_mm,
          } as FittedWeight;
        })
        .filter((w): w is FittedWeight => w !== null);
      if (problems.length) {
        // Give back the ids handed out for a refused request.
        job.counters = countersOf(job);
        throw new ApiError(
          400,
          'invalid_request',
          `${problems.length} problem(s) in the weights: ${problems.join('; ')}`,
          'change the weights and send the run again',
          problems,
        );
      }
      const weights = [...keep, ...added];
      const speed = this.speedFor(job);
      const force = (w: FittedWeight) =>
        speed === null ? null : centrifugalForceN(w.mass_g, w.radius_mm, speed);
      const changes: WeightChange[] = [
        ...current
          .filter((w) => !keep.includes(w))
          .map((w) => ({ action: 'remove' as const, weight: w, force_n: force(w) })),
        ...added.map((w) => ({ action: 'fit' as const, weight: w, force_n: force(w) })),
      ];
      const nTrial = job.runs.filter((r) => r.purpose === 'trial').length + 1;
      const nCheck = job.runs.filter((r) => r.purpose === 'check').length + 1;
      const label =
        req.label ??
        (req.purpose === 'trial' ? `trial ${nTrial}` : nCheck === 1 ? 'check' : `check ${nCheck}`);
      const run = newRun(job, req.purpose, label, weights, changes, this.nowIso(), actor, true);
      job.runs.push(run);
      // a failed attempt is out of date once a run is added
      if (req.purpose === 'trial') job.solution = null;
      const what =
        changes
          .map(
            (c) =>
              `${c.action} ${c.weight.id} ${fmt(c.weight.mass_g)} g ` +
              `at ${fmt(c.weight.angle_deg)} deg in ${c.weight.plane}`,
          )
          .join('; ') || 'no weight change';
      await this.record(
        job,
        actor,
        'weights_changed',
        'info',
        `${runName(run)}: ${what}; cautions acknowledged`,
        {
          run: run.index,
          label,
          changes: changes.map((c) => ({ action: c.action, ...c.weight, force_n: c.force_n })),
          weights_on_rotor: weights,
          angle_convention: job.setup.angle_convention,
        },
      );
    });
  }

  startCapture(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(
      captureSchema,
      raw,
      'capture request',
      jobId,
      by,
      'refuse',
      async (job, actor, req) => {
        const last = job.runs[job.runs.length - 1]!;
        if (last.discarded)
          throw conflict(`${runName(last)} was discarded`, 'declare the next run first');
        if (last.capture && job.solution?.result.ok && last.purpose !== 'check') {
          throw conflict(
            `${runName(last)} is measured and the job was solved from it`,
            'declare the check run next',
          );
        }
        // a failed attempt is out of date once a run changes
        if (last.purpose !== 'check') job.solution = null;
        const settings: CaptureSettings = {
          ...this.deps.capture,
          revolutions: req.revolutions ?? this.deps.capture.revolutions,
        };
        this.capture = {
          run: last.index,
          cap: new RunCapture(job.setup.sensors, settings),
          by: actor,
        };
        await this.record(
          job,
          actor,
          'capture_started',
          'info',
          `${runName(last)}${last.capture ? ' (repeat)' : ''}: ` +
            `${settings.settleRevolutions} revolutions ` +
            `to settle, ${settings.revolutions} averaged`,
          {
            run: last.index,
            label: last.label,
            settle_revolutions: settings.settleRevolutions,
            revolutions: settings.revolutions,
          },
        );
      },
    );
  }

  cancelCapture(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(byOnlySchema, raw, 'request', jobId, by, 'allow', async (job, actor) => {
      const c = this.capture;
      if (!c) throw conflict('no capture is running', 'nothing to cancel');
      this.capture = null;
      const run = job.runs[c.run]!;
      run.capture_failures.push({ at: this.nowIso(), why: `cancelled by ${actor.name}` });
      await this.record(
        job,
        actor,
        'capture_cancelled',
        'info',
        `${runName(run)}: capture cancelled`,
        { run: run.index },
      );
    });
  }

  discardRun(
    jobId: string,
    index: number,
    raw: unknown,
    by: Omit<Actor, 'name'>,
  ): Promise<JobView> {
    return this.step(
      reasonSchema,
      raw,
      'discard request',
      jobId,
      by,
      'refuse',
      async (job, actor, req) => {
        const run = job.runs[index];
        if (!run)
          throw new ApiError(
            404,
            'not_found',
            `job ${job.job_id} has no run ${index}`,
            `runs are numbered 0-${job.runs.length - 1}`,
          );
        if (run.purpose === 'as_found')
          throw conflict(
            'the as-found run cannot be discarded',
            'repeat its capture instead, or abandon the job',
          );
        if (run.discarded) throw conflict(`${runName(run)} is already discarded`, 'nothing to do');
        if (run.purpose === 'trial' && job.solution?.result.ok)
          throw conflict(
            `the job was solved with ${runName(run)}`,
            'abandon the job and start again to change the trial runs',
          );
        if (run.purpose === 'trial') job.solution = null;
        const last = index === job.runs.length - 1;
        if (!run.capture && last) {
          job.runs.pop();
          job.counters = countersOf(job);
          await this.record(
            job,
            actor,
            'run_withdrawn',
            'info',
            `${runName(run)} withdrawn before it was measured: ${req.reason}`,
            { run: index, reason: req.reason },
          );
        } else {
          run.discarded = { at: this.nowIso(), by: actor, reason: req.reason };
          await this.record(
            job,
            actor,
            'run_discarded',
            'info',
            `${runName(run)} left out of the solution: ${req.reason}`,
            { run: index, reason: req.reason },
          );
        }
      },
    );
  }

  solve(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(byOnlySchema, raw, 'request', jobId, by, 'refuse', async (job, actor) => {
      if (job.runs.some((r) => r.purpose === 'check'))
        throw conflict(
          'the correction is already being checked',
          'finish the job, or abandon it and start again to solve anew',
        );
      const pending = job.runs.find((r) => !r.capture && !r.discarded);
      if (pending)
        throw conflict(
          `${runName(pending)} is not measured yet`,
          'capture it (or discard it) before solving',
        );
      let stored: StoredCoefficients | null = null;
      if (job.setup.kind === 'trim') {
        stored = await this.deps.store.loadCoefficients();
        if (!stored)
          throw conflict(
            'the stored influence coefficients are gone',
            'abandon this trim job and do one with trial runs',
          );
      } else {
        const trials = job.runs.filter((r) => r.purpose === 'trial' && !r.discarded).length;
        if (trials < TRIALS_NEEDED[job.setup.kind]) {
          throw conflict(
            `a ${job.setup.kind.replace('_', '-')} job needs ` +
              `${TRIALS_NEEDED[job.setup.kind]} trial run(s); ${trials} measured`,
            'declare and capture the next trial run',
          );
        }
      }
      let balanceJob = balanceJobOf(job);
      if (stored) {
        try {
          balanceJob = {
            ...balanceJob,
            influence_coefficients: coefficientsForJob(
              stored,
              balanceJob,
              'stored influence coefficients',
            ),
            coefficients_speed_rpm: stored.speed_rpm,
          };
        } catch (e) {
          if (isUserError(e)) throw badRequest(e.message, e.hint);
          throw e;
        }
      }
      const result = solveBalanceJob(balanceJob);
      job.solution = { at: this.nowIso(), by: actor, job: balanceJob, result };
      const summary = result.ok
        ? `corrections ` +
          `${result.corrections.map((c) => `${c.plane} ${fmt(c.mass_g)} g at ${fmt(c.angle_deg)} deg`).join(', ')}`
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
    return this.step(
      finishSchema,
      raw,
      'finish request',
      jobId,
      by,
      'refuse',
      async (job, actor, req) => {
        if (!job.solution?.result.ok)
          throw conflict(
            'the job has no correction to keep',
            'solve it first (with enough good runs), or abandon it',
          );
        const pending = job.runs.find((r) => !r.capture && !r.discarded);
        if (pending)
          throw conflict(
            `${runName(pending)} is declared but not measured`,
            'capture it or discard it first',
          );
        job.status = 'finished';
        job.closed = { at: this.nowIso(), by: actor, note: req.note ?? null };
        const exp = exportCoefficients(job.solution.job, job.solution.result, {
          asset: job.asset,
          jobId: job.job_id,
          savedAt: job.closed.at,
        });
        if ('coefficients' in exp) {
          await this.deps.store.saveCoefficients(exp.coefficients);
          job.coefficients = { saved: true, reason: null };
        } else {
          job.coefficients = { saved: false, reason: exp.reason };
        }
        const left = weightsOnRotor(job);
        await this.record(
          job,
          actor,
          'job_finished',
          'info',
          `finished; weights on the rotor: ` +
            `${left.map((w) => `${w.id} ${fmt(w.mass_g)} g at ${fmt(w.angle_deg)} deg in ${w.plane}`).join(', ') || 'none'}; ` +
            `coefficients ` +
            `${job.coefficients.saved ? 'kept for the watcher' : `not kept (${job.coefficients.reason})`}`,
          {
            weights_on_rotor: left,
            coefficients_saved: job.coefficients.saved,
            ...(job.coefficients.reason ? { coefficients_not_saved: job.coefficients.reason } : {}),
          },
        );
        this.active = null;
        if (job.coefficients.saved) {
          try {
            this.deps.onCoefficientsSaved?.();
          } catch (e) {
            this.deps.logger.error(
              { error: (e as Error).message },
              'reloading the stored influence coefficients failed',
            );
          }
        }
        this.changed();
      },
    );
  }

  abandon(jobId: string, raw: unknown, by: Omit<Actor, 'name'>): Promise<JobView> {
    return this.step(
      reasonSchema,
      raw,
      'abandon request',
      jobId,
      by,
      'allow',
      async (job, actor, req) => {
        if (this.capture) this.capture = null;
        job.status = 'abandoned';
        job.closed = { at: this.nowIso(), by: actor, note: req.reason };
        const left = weightsOnRotor(job);
        await this.record(
          job,
          actor,
          'job_abandoned',
          left.length ? 'warning' : 'info',
          `abandoned: ` +
            `${req.reason}${left.length ? `; STILL ON THE ROTOR: ${left.map((w) => `${w.id} ${fmt(w.mass_g)} g at ${fmt(w.angle_deg)} deg in ${w.plane}`).join(', ')}` : ''}`,
          {
            reason: req.reason,
            weights_on_rotor: left,
          },
        );
        this.active = null;
        this.changed();
      },
    );
  }

  /** A job by id: the open one from memory, others from the store. */
  async getJob(jobId: string): Promise<WorkbenchJob> {
    if (this.active?.job_id === jobId) return this.active;
    const rec = (await this.loadRecord(jobId)) as Partial<WorkbenchRecord>;
    if (!rec.workbench)
      throw new ApiError(
        404,
        'not_found',
        `job ${jobId} was recorded by the command line, not the workbench`,
        `read it with \`turnwise balance export ${jobId}\``,
      );
    return rec.workbench;
  }

  /** The saved record of a job, for export. */
  async exportJob(jobId: string): Promise<BalanceJobRecord> {
    if (this.active?.job_id === jobId) return recordOf(this.active, this.nowIso());
    return this.loadRecord(jobId);
  }

  async listJobs(): Promise<
    Array<{
      job_id: string;
      status: string;
      kind: string | null;
      created_at: string | null;
      created_by: string | null;
      saved_at: string;
    }>
  > {
    const out = [];
    for (const id of await this.deps.store.listJobs()) {
      try {
        const rec = (await this.deps.store.loadJob(id)) as Partial<WorkbenchRecord> | null;
        if (!rec) continue;
        const wb = rec.workbench;
        out.push({
          job_id: id,
          status:
            wb?.status ?? (rec.result?.ok ? 'solved (command line)' : 'recorded (command line)'),
          kind: wb?.setup.kind ?? null,
          created_at: wb?.created_at ?? null,
          created_by: wb?.created_by.name ?? rec.recorded_by ?? null,
          saved_at: rec.saved_at ?? '',
        });
      } catch (e) {
        this.deps.logger.warn(
          { job_id: id, error: (e as Error).message },
          'a stored balancing job could not be read',
        );
      }
    }
    return out.sort((a, b) => (a.saved_at < b.saved_at ? 1 : -1));
  }

  /** For the MQTT `balancing.session` command: start a job, report the open one, or abandon it. */
  async sessionCommand(args: {
    action: 'start' | 'status' | 'abort';
    params?: Record<string, unknown>;
  }): Promise<Record<string, unknown>> {
    const by = { token: 'mqtt-command', role: 'command' as const };
    const summary = (v: JobView | null) =>
      v
        ? {
            job_id: v.job.job_id,
            status: v.job.status,
            kind: v.job.setup.kind,
            step: v.step,
            next: v.next,
            runs: v.job.runs.length,
            angle_convention: v.job.setup.angle_convention,
          }
        : { job_id: null, status: 'none' };
    try {
      if (args.action === 'status') return summary(this.view());
      if (args.action === 'start') return summary(await this.createJob(args.params ?? {}, by));
      const job = this.active;
      if (!job) return { job_id: null, status: 'none', note: 'no balancing job was open' };
      const reason =
        typeof args.params?.reason === 'string' ? args.params.reason : 'aborted by a plant command';
      const name = typeof args.params?.by === 'string' ? args.params.by : 'plant command';
      return summary(await this.abandon(job.job_id, { reason, by: name }, by));
    } catch (e) {
      if (e instanceof ApiError) throw new UserError('balancing.session', e.message, e.hint);
      throw e;
    }
  }

  // ---- internals ----

  /**
   * One action on the open job: the body checked, run in turn with the others, the job's view
   * returned.
   */
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
      throw conflict(
        job
          ? `job ${jobId} is not the open job (${job.job_id} is)`
          : `job ${jobId} is not open (no job is)`,
        'only the open job can be changed; finished and abandoned jobs are read only',
      );
    }
    return job;
  }

  private noCapture(job: WorkbenchJob): void {
    if (this.capture)
      throw conflict(
        `${runName(job.runs[this.capture.run]!)} is being captured`,
        'wait for the capture to finish, or cancel it',
      );
  }

  private actor(job: WorkbenchJob, by: Omit<Actor, 'name'>, name: string | undefined): Actor {
    return { ...by, name: name ?? job.created_by.name };
  }

  private speedFor(job: WorkbenchJob): number | null {
    return speedFor(job, {
      liveSpeedRpm: this.deps.liveSpeed(),
      ratedRpm: ratedRpmOf(this.deps.config),
    });
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
      await this.record(job, c.by, 'capture_failed', 'warning', `${runName(run)}: ${why}`, {
        run: run.index,
        why,
      });
      return;
    }
    if (run.capture) run.earlier_captures.push(run.capture);
    run.capture = { ...result, at, by: c.by };
    const asFound = job.runs[0]!.capture;
    if (run.purpose === 'trial' && asFound) {
      run.trial_check = trialCheckOf(job, asFound, result);
    }
    if (run.purpose === 'check' && asFound && job.solution) run.residual = residualOf(job, run);
    const text = job.setup.sensors
      .map(
        (s) =>
          `${s} ${fmt(result.readings[s]!.amp_pk_mm_s, 2)} mm/s ` +
          `pk at ${fmt(result.readings[s]!.phase_deg)} deg`,
      )
      .join(', ');
    await this.record(
      job,
      c.by,
      'run_captured',
      'info',
      `${runName(run)} at ${fmt(result.speed_rpm, 0)} r/min ` +
        `over ${fmt(result.revolutions, 0)} revolutions: ${text}`,
      {
        run: run.index,
        label: run.label,
        speed_rpm: result.speed_rpm,
        revolutions: result.revolutions,
        readings: result.readings,
        notes: result.notes,
        ...(run.trial_check ? { moved_enough: run.trial_check.some((t) => t.moved_enough) } : {}),
        ...(run.residual
          ? {
              residual_pct_of_as_found: Math.max(
                ...run.residual.sensors.map((x) => x.pct_of_as_found),
              ),
            }
          : {}),
      },
    );
  }

  private async loadRecord(jobId: string): Promise<BalanceJobRecord> {
    let rec: BalanceJobRecord | null;
    try {
      rec = await this.deps.store.loadJob(jobId);
    } catch (e) {
      if (isUserError(e))
        throw new ApiError(
          e.where.startsWith('job id') ? 400 : 500,
          e.where.startsWith('job id') ? 'invalid_request' : 'store_error',
          e.message,
          e.hint,
        );
      throw e;
    }
    if (!rec)
      throw new ApiError(
        404,
        'not_found',
        `no balancing job ${jobId}`,
        'list the jobs with GET /api/jobs',
      );
    return rec;
  }

  private log(job: WorkbenchJob, by: Actor, action: string, detail: string): void {
    job.log.push({ at: this.nowIso(), by, action, detail });
  }

  /** Logs, saves, events and announces one action. The event goes out after the record is saved. */
  private async record(
    job: WorkbenchJob,
    by: Actor,
    action: string,
    severity: AgentEvent['severity'],
    detail: string,
    fields: Record<string, unknown>,
  ): Promise<void> {
    this.log(job, by, action, detail);
    const at = job.log[job.log.length - 1]!.at;
    const logFields = { job_id: job.job_id, action, by: by.name, token: by.token, role: by.role };
    if (severity === 'info') this.deps.logger.info(logFields, `balancing: ${detail}`);
    else this.deps.logger.warn(logFields, `balancing: ${detail}`);
    try {
      await this.deps.store.saveJob(recordOf(job, this.nowIso()));
    } catch (e) {
      this.deps.logger.error(
        { job_id: job.job_id, error: (e as Error).message },
        'saving the balancing job failed; it is kept ' +
          'in memory and saved again with the next action',
      );
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
      this.deps.logger.error(
        { job_id: job.job_id, type, error: (e as Error).message },
        'a balancing event could not be handed to the outputs',
      );
    }
    this.changed();
  }
}
