/**
 * What the page shows of a balancing job: the job, the step it is at and what to do next in words,
 * a trial-weight suggestion, the weight changes to propose, the cautions. Pure: the job and the
 * moment's context (capture progress, live speed) in, plain data out. The page's workbench script
 * (agent/live/page/workbench.js) is type-checked against JobView.
 */
import type { SweepEvidence } from '../../watcher/rules/types.js';
import type { Config } from '../../config/schema.js';
import { conventionText } from '../conventions.js';
import type { PlaneWeight } from '../job.js';
import { balancingCautions } from '../report.js';
import {
  centrifugalForceN,
  splitOntoPositions,
  suggestTrialMassG,
  type SplitPart,
} from '../weights.js';
import type { CaptureProgress } from './capture.js';
import {
  runName,
  TRIALS_NEEDED,
  weightsOnRotor,
  wrap360,
  type FittedWeight,
  type JobStep,
  type PlaneSetup,
  type ProposedChange,
  type WorkbenchJob,
} from './records.js';

export interface JobView {
  readonly job: WorkbenchJob;
  readonly convention: string;
  readonly step: JobStep;
  /** What to do next, in words. */
  readonly next: string;
  readonly capture: CaptureProgress | null;
  readonly weights_on_rotor: readonly FittedWeight[];
  readonly speed_for_forces_rpm: number | null;
  readonly trial_suggestion: ReadonlyArray<{
    readonly plane: string;
    readonly mass_g: number;
    readonly radius_mm: number;
    readonly force_n: number;
    readonly bearing_load_kg: number;
  }> | null;
  readonly trial_suggestion_missing: string | null;
  readonly proposals: readonly ProposedChange[];
  /**
   * Set when the balancing speed sits inside a resonance's half-power band on the last recorded
   * sweep.
   */
  readonly resonance_warning: string | null;
  readonly cautions: readonly string[];
}

/** The moment's context a view needs beside the job. */
export interface ViewContext {
  /** Progress of the capture running on this job, or null. */
  readonly capture: CaptureProgress | null;
  /** Latest live speed, r/min. */
  readonly liveSpeedRpm: number | null;
  /** The machine's rated speed, r/min (config machine.rated_rpm). */
  readonly ratedRpm: number | null;
  /** Resonances of the last recorded sweep; absent or null when none is known. */
  readonly sweep?: SweepEvidence | null;
}

/**
 * Influence coefficients measured near a resonance are unreliable (common practice: there the 1x
 * amplitude and phase change sharply with small speed changes, so the trial run's change is not the
 * weight's alone). Returns the warning when `speedRpm` is inside a half-power band of the sweep.
 */
export function resonanceWarning(
  speedRpm: number | null,
  sweep: SweepEvidence | null | undefined,
): string | null {
  if (speedRpm === null || !sweep) return null;
  const near = sweep.resonances.filter(
    (r) => speedRpm >= r.half_power_rpm[0] && speedRpm <= r.half_power_rpm[1],
  );
  if (near.length === 0) return null;
  const where = near
    .map(
      (r) =>
        `${Math.round(r.rpm)} r/min on ${r.sensor} (half-power band ` +
        `${Math.round(r.half_power_rpm[0])}-${Math.round(r.half_power_rpm[1])})`,
    )
    .join('; ');
  return (
    `The balancing speed ${Math.round(speedRpm)} r/min is inside the band of a resonance ` +
    `found on the last ${sweep.direction === 'up' ? 'run-up' : 'coast-down'} (sweep ` +
    `${sweep.sweep_id}): ${where}. ` +
    'Influence coefficients measured here are unreliable: the 1x ' +
    'swings with small speed changes. Balance at a speed away from the ' +
    'resonance if the process allows, and have the support checked.'
  );
}

/**
 * Speed for forces and suggestions: the job's given speed, else the as-found run's, else live, else
 * rated, r/min.
 */
export function speedFor(
  job: WorkbenchJob,
  ctx: Pick<ViewContext, 'liveSpeedRpm' | 'ratedRpm'>,
): number | null {
  return (
    job.setup.speed_rpm ??
    job.runs[0]?.capture?.speed_rpm ??
    ctx.liveSpeedRpm ??
    ctx.ratedRpm ??
    null
  );
}

/** The rated speed a view falls back on. */
export function ratedRpmOf(cfg: Config): number | null {
  return cfg.machine.rated_rpm ?? null;
}

export function jobView(job: WorkbenchJob, ctx: ViewContext): JobView {
  const s = job.setup;
  const speed = speedFor(job, ctx);
  const last = job.runs[job.runs.length - 1];
  const onRotor = last?.weights ?? [];
  const step = stepOf(job);

  let trial: JobView['trial_suggestion'] = null;
  let missing: string | null = null;
  if (s.kind !== 'trim') {
    if (s.rotor_mass_kg === null) missing = 'give the rotor mass to get a trial-weight suggestion';
    else if (speed === null) missing = 'no speed yet: the suggestion needs the running speed';
    else {
      const load = s.rotor_mass_kg / s.bearings;
      trial = s.planes.map((p) => {
        const m = suggestTrialMassG(load, p.radius_mm, speed);
        return {
          plane: p.name,
          mass_g: m,
          radius_mm: p.radius_mm,
          force_n: centrifugalForceN(m, p.radius_mm, speed),
          bearing_load_kg: load,
        };
      });
    }
  }
  return {
    job,
    convention: conventionText(s.angle_convention),
    step,
    next: nextText(job, step),
    capture: ctx.capture,
    weights_on_rotor: onRotor,
    speed_for_forces_rpm: speed,
    trial_suggestion: trial,
    trial_suggestion_missing: missing,
    proposals: proposals(job),
    resonance_warning: resonanceWarning(speed, ctx.sweep),
    cautions: balancingCautions(),
  };
}

export function stepOf(job: WorkbenchJob): JobStep {
  if (job.status !== 'open') return 'closed';
  const last = job.runs[job.runs.length - 1]!;
  if (!last.capture && !last.discarded) return 'capture';
  if (!job.solution?.result.ok) {
    const trials = job.runs.filter(
      (r) => r.purpose === 'trial' && !r.discarded && r.capture,
    ).length;
    return trials < TRIALS_NEEDED[job.setup.kind] ? 'trial' : 'solve';
  }
  return job.runs.some((r) => r.purpose === 'check' && r.capture && !r.discarded)
    ? 'check'
    : 'correct';
}

export function nextText(job: WorkbenchJob, step: JobStep): string {
  const last = job.runs[job.runs.length - 1]!;
  switch (step) {
    case 'closed':
      return `this job is ${job.status}`;
    case 'capture':
      return `bring the fan to steady speed and capture ${runName(last)}`;
    case 'trial': {
      const n =
        job.runs.filter((r) => r.purpose === 'trial' && !r.discarded && r.capture).length + 1;
      if (job.setup.kind === 'static_couple')
        return n === 1
          ? 'declare trial 1: a static pair (equal weights at the same angle in both planes)'
          : 'declare trial 2: a couple pair (equal weights 180 degrees apart)';
      return job.setup.planes.length === 1
        ? 'declare the trial run: one trial weight in the plane'
        : `declare trial ${n}: a trial weight in plane ${job.setup.planes[n - 1]?.name ?? ''}`;
    }
    case 'solve':
      return job.setup.kind === 'trim'
        ? 'solve from the stored influence coefficients'
        : 'solve for the correction weights (or add another trial run)';
    case 'correct':
      return 'fit the correction weights and declare the check run';
    case 'check':
      return 'look at the residual: finish the job, or fit the trim weights and check again';
  }
}

function splitOf(
  plane: PlaneSetup,
  w: { mass_g: number; angle_deg: number; radius_mm: number },
): SplitPart[] | null {
  return plane.positions ? splitOntoPositions(w.mass_g, w.angle_deg, plane.positions) : null;
}

function proposalFrom(
  job: WorkbenchJob,
  title: string,
  remove: ProposedChange['remove'],
  weights: readonly PlaneWeight[],
): ProposedChange {
  const add = weights
    .filter((w) => w.mass_g > 0)
    .map((w) => ({
      plane: w.plane,
      mass_g: w.mass_g,
      angle_deg: wrap360(w.angle_deg),
      radius_mm: job.setup.planes.find((p) => p.name === w.plane)!.radius_mm,
    }));
  const anyPositions = job.setup.planes.some((p) => p.positions);
  const add_split = anyPositions
    ? add.flatMap((a) => {
        const plane = job.setup.planes.find((p) => p.name === a.plane)!;
        const parts = splitOf(plane, a);
        return parts
          ? parts
              .filter((p) => p.mass_g > 0.005)
              .map((p) => ({
                plane: a.plane,
                mass_g: p.mass_g,
                angle_deg: p.angle_deg,
                radius_mm: a.radius_mm,
                position: p.position,
              }))
          : [{ ...a, position: -1 }];
      })
    : null;
  return { title, remove, add, add_split };
}

/**
 * The weight changes to propose next: the corrections (trial weights off or left on), or the trim
 * weights after a check run.
 */
export function proposals(job: WorkbenchJob): ProposedChange[] {
  if (job.status !== 'open' || !job.solution?.result.ok) return [];
  const r = job.solution.result;
  const checks = job.runs.filter((x) => x.purpose === 'check' && x.capture && !x.discarded);
  const lastRun = job.runs[job.runs.length - 1]!;
  if (checks.length && lastRun.residual && lastRun.purpose === 'check') {
    return [
      proposalFrom(
        job,
        'add the trim weights, leaving the weights now on the rotor',
        [],
        lastRun.residual.trim,
      ),
    ];
  }
  if (checks.length) return [];
  const trialsOn = weightsOnRotor(job).some((w) => w.role === 'trial');
  const out = [
    proposalFrom(
      job,
      trialsOn ? 'take the trial weights off and fit the corrections' : 'fit the corrections',
      trialsOn ? 'all_trials' : [],
      r.corrections,
    ),
  ];
  if (trialsOn)
    out.push(
      proposalFrom(
        job,
        'leave the trial weights on and add these',
        [],
        r.corrections_trials_left_in,
      ),
    );
  return out;
}
