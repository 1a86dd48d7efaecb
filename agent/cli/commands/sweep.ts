import { loadConfig } from '../../config/load.js';
import type { Config } from '../../config/schema.js';
import { Analyzer } from '../../dsp/analyzer.js';
import { SpeedPointRecorder } from '../../dsp/speed-points.js';
import { UserError } from '../../errors.js';
import { fmtVel, round, table } from '../../report/units.js';
import { sweepRecordJson, sweepsFromPoints, type Sweep } from '../../sweep/sweeps.js';

export { sweepRecordJson };
import { WavSource } from '../../../drivers/wav/reader.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';
import { Progress } from '../progress.js';

const usage = 'turnwise sweep REC.wav --config CFG.yaml [--json] [--pcm-full-scale-v VOLTS]';

/** Reads a recording into run-ups and coast-downs (the 1x vector against speed, resonances). */
export async function sweepRecording(file: string, cfg: Config, opts: { pcmFullScaleV?: number; progress?: Progress } = {}): Promise<{ sweeps: Sweep[]; points: number; sampleRate: number }> {
  const src = new WavSource(file, { blockFrames: 8192, pcmFullScaleV: opts.pcmFullScaleV });
  const info = await src.open();
  try {
    const recorder = new SpeedPointRecorder({ channels: cfg.sensors.length, sampleRate: info.sampleRate, resamplePoints: cfg.dsp.resample_points, revolutionsPerPoint: cfg.sweep.revolutions_per_point });
    const an = new Analyzer({ config: cfg, sampleRate: info.sampleRate, channelCount: info.channelCount, maxBlock: 8192, totalSamples: info.totalSamples, sourceName: file, revolutionTap: recorder });
    const total = info.totalSamples ?? 0;
    for await (const item of src.items()) {
      an.push(item);
      if (item.kind === 'samples') {
        const done = item.startIndex + (item.channels[0]?.length ?? 0);
        opts.progress?.update(done, total, `${(done / info.sampleRate).toFixed(1)} of ${(total / info.sampleRate).toFixed(1)} s`);
      }
    }
    opts.progress?.done();
    const problem = an.diagnoseTach();
    if (problem) throw new UserError(file, problem, 'no 1x vector can be measured without a trustworthy once-per-turn reference');
    return { sweeps: sweepsFromPoints(recorder.points(), cfg, info.sampleRate), points: recorder.length, sampleRate: info.sampleRate };
  } finally {
    await src.close();
  }
}

/** The JSON `turnwise sweep --json` prints. Units are in the field names. */
export function sweepJson(file: string, sweeps: readonly Sweep[]): Record<string, unknown> {
  return {
    file,
    phase_convention: "lag in degrees (0-360) from the tach rising edge to the positive peak of the 1x velocity component, as measured (mounting_angle_deg not subtracted)",
    amplification_factor_method: 'half-power on the measured 1x amplitude curve: AF = N_peak / (N2 - N1) at 0.707 of the peak (API 684 practice, from memory)',
    separation_margin_basis: 'separation_margin_pct = 100 x |rated - N_peak| / rated; required_margin_pct per API 684 for that AF (from memory)',
    sweeps: sweeps.map(sweepRecordJson),
  };
}

export function sweepTable(file: string, sweeps: readonly Sweep[], cfg: Config): string {
  const u = cfg.units;
  if (sweeps.length === 0) return `${file}: no run-up or coast-down found (the speed never moved through ${Math.round(cfg.sweep.min_change_share * 100)} % of ${cfg.machine.rated_rpm ? 'rated speed' : 'the highest speed seen'}; sweep.min_change_share)\n`;
  const parts = sweeps.map((s, i) => {
    const head = `sweep ${i + 1}: ${s.direction === 'up' ? 'run-up' : 'coast-down'} ${s.from_rpm.toFixed(0)} -> ${s.to_rpm.toFixed(0)} r/min, ${s.duration_s.toFixed(1)} s from ${s.start_s.toFixed(1)} s (${s.rate_rpm_per_s.toFixed(1)} r/min per s), ${s.points} points`;
    const rows = s.channels.flatMap((c) =>
      c.resonances.length === 0
        ? [[c.id, 'none', '-', '-', '-', '-', '-', '-']]
        : c.resonances.map((r) => [
            c.id,
            r.rpm.toFixed(0),
            fmtVel(r.amp_pk_mm_s, u),
            r.phase_deg.toFixed(0),
            r.phase_shift_deg.toFixed(0),
            r.amplification_factor.toFixed(1),
            r.separation_margin_pct === null ? '-' : r.separation_margin_pct.toFixed(1),
            r.required_margin_pct === null ? '-' : `${r.required_margin_pct.toFixed(1)}${r.margin_ok === false ? ' (too close)' : ''}`,
          ]),
    );
    const t = table(['sensor', 'resonance r/min', `1x ${u} pk`, 'phase deg', 'shift deg', 'AF', 'margin %', 'required %'], rows);
    const w = s.warnings.length ? `\nwarnings:\n${s.warnings.map((x) => `  - ${x}`).join('\n')}` : '';
    return `${head}\n${t}${w}`;
  });
  return (
    `${file}: ${cfg.machine.id}\nphase = lag from the tach edge to the positive 1x velocity peak; AF by the half-power method (API 684 practice, from memory); margin from rated speed\n\n` +
    parts.join('\n\n') +
    '\n'
  );
}

export const sweepCommand: Command = {
  name: 'sweep',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('sweep', usage, argv, {
      config: { type: 'string', short: 'c' },
      json: { type: 'boolean' },
      'pcm-full-scale-v': { type: 'string' },
    });
    const file = positionals[0];
    if (!file || positionals.length > 1) throw new UserError('turnwise sweep', 'expects exactly one recording', `usage: ${usage}`);
    if (!values.config) throw new UserError('turnwise sweep', 'missing --config', `usage: ${usage}`);
    let pcmFullScaleV: number | undefined;
    if (values['pcm-full-scale-v'] !== undefined) {
      pcmFullScaleV = Number(values['pcm-full-scale-v']);
      if (!(pcmFullScaleV > 0)) throw new UserError('--pcm-full-scale-v', `expects a positive number of volts, got "${values['pcm-full-scale-v']}"`, 'e.g. --pcm-full-scale-v 10 for a +/-10 V board');
    }
    const cfg = loadConfig(values.config);
    const { sweeps } = await sweepRecording(file, cfg, { pcmFullScaleV, progress: new Progress('sweep') });
    if (sweeps.length === 0) process.stderr.write('turnwise sweep: no run-up or coast-down found\n');
    process.stdout.write(values.json ? JSON.stringify(sweepJson(file, sweeps), null, 2) + '\n' : sweepTable(file, sweeps, cfg));
    return 0;
  },
};
