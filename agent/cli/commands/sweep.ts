import { loadConfig } from '../../config/load.js';
import type { Config } from '../../config/schema.js';
import { SpeedPointRecorder } from '../../dsp/speed-points.js';
import { fmtVel, round, table } from '../../report/units.js';
import { sweepRecordJson, sweepsFromPoints, type Sweep } from '../../sweep/sweeps.js';
import { measureRecording, recordingArgs } from '../recording.js';
import type { Command } from '../command.js';
import { Progress } from '../progress.js';

const usage = 'turnwise sweep REC.wav --config CFG.yaml [--json] [--pcm-full-scale-v VOLTS]';

/** Reads a recording into run-ups and coast-downs (the 1x vector against speed, resonances). */
export async function sweepRecording(
  file: string,
  cfg: Config,
  opts: { pcmFullScaleV?: number; progress?: Progress } = {},
): Promise<{ sweeps: Sweep[]; points: number; sampleRate: number }> {
  let recorder: SpeedPointRecorder | undefined;
  const tapFor = (sampleRate: number) =>
    (recorder = new SpeedPointRecorder({
      channels: cfg.sensors.length,
      sampleRate,
      resamplePoints: cfg.dsp.resample_points,
      revolutionsPerPoint: cfg.sweep.revolutions_per_point,
    }));
  const { sampleRate } = await measureRecording(file, cfg, { ...opts, tapFor });
  return {
    sweeps: sweepsFromPoints(recorder!.points(), cfg, sampleRate),
    points: recorder!.length,
    sampleRate,
  };
}

/** The JSON `turnwise sweep --json` prints. Units are in the field names. */
export function sweepJson(file: string, sweeps: readonly Sweep[]): Record<string, unknown> {
  return {
    file,
    phase_convention:
      'lag in degrees (0-360) from the tach rising edge to the positive peak of ' +
      'the 1x velocity component, as measured (mounting_angle_deg not subtracted)',
    amplification_factor_method:
      'half-power on the measured 1x amplitude curve: AF = N_peak / (N2 - N1) ' +
      'at 0.707 of the peak (API 684 practice, from memory)',
    separation_margin_basis:
      'separation_margin_pct = 100 x |rated - N_peak| / rated; ' +
      'required_margin_pct per API 684 for that AF (from memory)',
    sweeps: sweeps.map(sweepRecordJson),
  };
}

export function sweepTable(file: string, sweeps: readonly Sweep[], cfg: Config): string {
  const u = cfg.units;
  if (sweeps.length === 0)
    return (
      `${file}: no run-up or coast-down found (the speed never moved ` +
      `through ${Math.round(cfg.sweep.min_change_share * 100)} % of ` +
      `${cfg.machine.rated_rpm ? 'rated speed' : 'the highest speed seen'}; ` +
      `sweep.min_change_share)\n`
    );
  const parts = sweeps.map((s, i) => {
    const head =
      `sweep ${i + 1}: ${s.direction === 'up' ? 'run-up' : 'coast-down'} ` +
      `${s.from_rpm.toFixed(0)} -> ${s.to_rpm.toFixed(0)} r/min, ` +
      `${s.duration_s.toFixed(1)} s from ${s.start_s.toFixed(1)} s ` +
      `(${s.rate_rpm_per_s.toFixed(1)} r/min per s), ${s.points} points`;
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
            r.required_margin_pct === null
              ? '-'
              : `${r.required_margin_pct.toFixed(1)}${r.margin_ok === false ? ' (too close)' : ''}`,
          ]),
    );
    const t = table(
      [
        'sensor',
        'resonance r/min',
        `1x ${u} pk`,
        'phase deg',
        'shift deg',
        'AF',
        'margin %',
        'required %',
      ],
      rows,
    );
    const w = s.warnings.length
      ? `\nwarnings:\n${s.warnings.map((x) => `  - ${x}`).join('\n')}`
      : '';
    return `${head}\n${t}${w}`;
  });
  return (
    `${file}: ${cfg.machine.id}\nphase = lag from the tach edge to ` +
    `the positive 1x velocity peak; AF by the half-power method ` +
    `(API 684 practice, from memory); margin from rated speed\n\n` +
    parts.join('\n\n') +
    '\n'
  );
}

export const sweepCommand: Command = {
  name: 'sweep',
  usage,
  async run(argv) {
    const { file, config, json, pcmFullScaleV } = recordingArgs('sweep', usage, argv);
    const cfg = loadConfig(config);
    const { sweeps } = await sweepRecording(file, cfg, {
      pcmFullScaleV,
      progress: new Progress('sweep'),
    });
    if (sweeps.length === 0)
      process.stderr.write('turnwise sweep: no run-up or coast-down found\n');
    process.stdout.write(
      json
        ? JSON.stringify(sweepJson(file, sweeps), null, 2) + '\n'
        : sweepTable(file, sweeps, cfg),
    );
    return 0;
  },
};
