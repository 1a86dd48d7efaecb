import { loadConfig } from '../../config/load.js';
import type { Config } from '../../config/schema.js';
import { UserError } from '../../errors.js';
import { baselineFromConfig, BaselineLearner, type Baseline } from '../../watcher/baseline.js';
import { systemClock, type Clock } from '../../watcher/clock.js';
import { assessHealth } from '../../watcher/health.js';
import { FileHistoryStore } from '../../watcher/history.js';
import { resolveWatcherSettings } from '../../watcher/settings.js';
import { FileBaselineStore, FileWatcherStateStore } from '../../watcher/stores.js';
import { trendReport, type SeriesTrend } from '../../watcher/trend.js';
import { readWindowsFile } from '../../watcher/window-file.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';

const usage =
  'turnwise condition show --config FILE [--json]\n' +
  '       turnwise condition learn-baseline --config FILE WINDOWS.json [--json]\n' +
  '       turnwise condition clear-baseline --config FILE';

/** Velocity in the units the config asks people to see (JSON stays in mm/s). */
function velocity(cfg: Config, mmS: number | null | undefined): string {
  if (mmS === null || mmS === undefined) return '-';
  return cfg.units === 'in/s' ? (mmS / 25.4).toFixed(3) : mmS.toFixed(2);
}

function trendWords(t: SeriesTrend): string {
  if (t.state === 'rising' && t.crossing_at && t.next_limit)
    return (
      `rising, reaches ${t.next_limit.name} about ` +
      `${t.crossing_at.slice(0, 16).replace('T', ' ')} UTC`
    );
  if (t.state === 'rising') return 'rising, above every limit';
  if (t.state === 'falling') return 'falling';
  if (t.state === 'no_trend') return 'no trend';
  return 'too little history';
}

function baselineTable(cfg: Config, b: Baseline, out: string[]): void {
  const u = cfg.units;
  out.push(
    `  baseline: ` +
      `${b.source === 'config' ? 'from the config (watcher.baseline)' : `learned ${b.learned_at}, ${b.windows} windows`}${b.speed_rpm ? ` at ${b.speed_rpm.toFixed(0)} r/min` : ''}`,
  );
  out.push(
    `    ${'sensor'.padEnd(8)} ${`1x ${u} rms`.padStart(12)} ` +
      `${'phase deg'.padStart(10)} ${`overall ${u}`.padStart(14)}`,
  );
  for (const [id, c] of Object.entries(b.channels)) {
    out.push(
      `    ${id.padEnd(8)} ${velocity(cfg, c.one_x_rms_mm_s).padStart(12)} ` +
        `${c.one_x_phase_deg.toFixed(0).padStart(10)} ` +
        `${velocity(cfg, c.overall_rms_mm_s).padStart(14)}`,
    );
  }
}

function show(cfg: Config, json: boolean): void {
  const s = resolveWatcherSettings(cfg);
  const baseline = baselineFromConfig(s) ?? new FileBaselineStore(cfg.state_dir).load();
  const state = new FileWatcherStateStore(cfg.state_dir).load();
  const history = new FileHistoryStore(cfg.state_dir).load();
  const trend = trendReport(s, history.points, baseline);
  if (json) {
    process.stdout.write(
      JSON.stringify(
        {
          asset: s.asset,
          state_dir: cfg.state_dir,
          limits: s.limits,
          confirmed: state,
          baseline,
          history_points: history.points.length,
          history_warnings: history.warnings,
          trend,
        },
        null,
        2,
      ) + '\n',
    );
    return;
  }
  const u = cfg.units;
  const out: string[] = [`${s.asset}: condition from ${cfg.state_dir}`];
  out.push(
    `  limits: ${s.limits.basis}: A/B ${velocity(cfg, s.limits.ab_mm_s)}, B/C ` +
      `${velocity(cfg, s.limits.bc_mm_s)}, C/D ${velocity(cfg, s.limits.cd_mm_s)} ${u}`,
  );
  out.push(
    state
      ? `  last reported: machine zone ${state.machine_zone ?? '-'}, unbalance ` +
          `${state.unbalance ?? '-'}, tach ${state.tach ?? '-'}, speed ${state.speed ?? '-'}`
      : '  last reported: nothing yet (the watcher has not run on this state directory)',
  );
  if (baseline) baselineTable(cfg, baseline, out);
  else
    out.push(
      '  baseline: none (learn one at commissioning, or set watcher.baseline in the config)',
    );
  out.push(
    `  history: ${history.points.length} ` +
      `point(s)${history.points.length ? ` from ${history.points[0]!.ts} to ${history.points[history.points.length - 1]!.ts}` : ''}`,
  );
  for (const w of history.warnings) out.push(`    ! ${w}`);
  out.push(`    ${'sensor'.padEnd(8)} ${'overall'.padEnd(48)} 1x`);
  for (const [id, t] of Object.entries(trend.channels))
    out.push(`    ${id.padEnd(8)} ${trendWords(t.overall).padEnd(48)} ${trendWords(t.one_x)}`);
  if (trend.soonest)
    out.push(
      `  soonest crossing: ${trend.soonest.sensor} ` +
        `${trend.soonest.series === 'overall' ? 'overall' : '1x'} reaches ` +
        `${trend.soonest.limit.name} about ${trend.soonest.crossing_at}`,
    );
  process.stdout.write(out.join('\n') + '\n');
}

function learn(cfg: Config, file: string, json: boolean, clock: Clock): void {
  const s = resolveWatcherSettings(cfg);
  if (s.w.baseline)
    throw new UserError(
      'watcher.baseline',
      'the baseline is set in the config',
      'remove watcher.baseline from the config to learn one',
    );
  const windows = readWindowsFile(file);
  const learner = new BaselineLearner(s);
  for (const w of windows) learner.add(w, assessHealth(w, s));
  const { baseline, left_out } = learner.finish(new Date(clock.now()).toISOString());
  new FileBaselineStore(cfg.state_dir).save(baseline);
  if (json) {
    process.stdout.write(JSON.stringify({ ok: true, baseline, left_out }, null, 2) + '\n');
    return;
  }
  const out = [
    `${s.asset}: baseline learned from ${windows.length} window(s) ` +
      `of ${file}, saved under ${cfg.state_dir}`,
  ];
  baselineTable(cfg, baseline, out);
  for (const l of left_out) out.push(`  left out: ${l}`);
  out.push('  A running agent reads the new baseline when it next starts.');
  process.stdout.write(out.join('\n') + '\n');
}

/** `turnwise condition`: baseline, last reported states and trend from the state directory. */
export function makeConditionCommand(clock: Clock = systemClock): Command {
  return {
    name: 'condition',
    usage,
    async run(argv) {
      const { values, positionals } = parseCommandArgs('condition', usage, argv, {
        config: { type: 'string', short: 'c' },
        json: { type: 'boolean' },
      });
      const [action, ...rest] = positionals;
      if (!values.config)
        throw new UserError('turnwise condition', 'needs --config FILE', `usage: ${usage}`);
      const cfg = loadConfig(values.config);
      if (action === 'show' && rest.length === 0) show(cfg, values.json === true);
      else if (action === 'learn-baseline' && rest.length === 1)
        learn(cfg, rest[0]!, values.json === true, clock);
      else if (action === 'clear-baseline' && rest.length === 0) {
        const removed = new FileBaselineStore(cfg.state_dir).clear();
        process.stdout.write(
          removed
            ? `${cfg.machine.id}: learned baseline removed from ${cfg.state_dir}\n`
            : `${cfg.machine.id}: no learned baseline in ${cfg.state_dir}\n`,
        );
      } else
        throw new UserError(
          'turnwise condition',
          action
            ? `unknown action or wrong arguments: "${positionals.join(' ')}"`
            : 'needs an action',
          `usage: ${usage}`,
        );
      return 0;
    },
  };
}

export const conditionCommand: Command = makeConditionCommand();
