import { loadConfig } from '../../config/load.js';
import type { Config } from '../../config/schema.js';
import type { WindowResult } from '../../dsp/types.js';
import { assessWindow, FileBaselineStore, type WindowAssessment } from '../../watcher/index.js';
import { UserError } from '../../errors.js';
import { fmtVel, round, table } from '../../report/units.js';
import { measureRecording, recordingArgs } from '../recording.js';
import type { Command } from '../command.js';
import { Progress } from '../progress.js';

const usage = 'turnwise analyze REC.wav --config CFG.yaml [--json] [--pcm-full-scale-v VOLTS]';

/** Runs the measurement core over a whole recording: one window. */
export async function analyzeRecording(
  file: string,
  cfg: Config,
  opts: { pcmFullScaleV?: number; progress?: Progress } = {},
): Promise<WindowResult> {
  return (await measureRecording(file, cfg, opts)).analyzer.takeWindow();
}

/**
 * The DSP's warnings, and the watcher's about the setup (a tach.pulses_per_rev that does not fit
 * the rated speed).
 */
export function analysisWarnings(w: WindowResult, a: WindowAssessment): string[] {
  const hint = a.speed.pulses_per_rev_hint;
  return hint ? [hint.why, ...w.warnings] : [...w.warnings];
}

/** The JSON document `turnwise analyze --json` prints. Units are in the field names. */
export function analysisJson(
  file: string,
  w: WindowResult,
  a: WindowAssessment,
): Record<string, unknown> {
  const z = a.zone;
  return {
    file,
    sample_rate_hz: w.sample_rate_hz,
    duration_s: round((w.end_index - w.start_index) / w.sample_rate_hz, 3),
    speed_rpm: round(w.speed_rpm, 1),
    speed_min_rpm: round(w.speed_min_rpm, 1),
    speed_max_rpm: round(w.speed_max_rpm, 1),
    revolutions: w.revolutions,
    revolutions_rejected: w.revolutions_rejected,
    band_hz: w.band_hz,
    spectrum_resolution_hz: round(w.spectrum_resolution_hz, 4),
    spectrum_segments: w.spectrum_segments,
    phase_convention:
      "lag in degrees (0-360 of the order's own cycle) from the tach " +
      'rising edge to the positive peak of the velocity component',
    tach: w.tach,
    zone: {
      machine: z.machine,
      basis: z.limits.basis,
      boundaries_mm_s: { a_b: z.limits.ab_mm_s, b_c: z.limits.bc_mm_s, c_d: z.limits.cd_mm_s },
      inhibited: z.inhibited,
      notes: z.notes,
    },
    unbalance: {
      kind: a.unbalance.kind,
      confidence: a.unbalance.confidence,
      evidence: a.unbalance.evidence,
      points_to: a.unbalance.points_to,
      limits: a.unbalance.limits,
      residual_pattern: a.unbalance.residual_pattern,
    },
    channels: w.channels.map((c) => ({
      id: c.id,
      channel: c.channel,
      bearing: c.bearing,
      direction: c.direction,
      mounting_angle_deg: c.mounting_angle_deg,
      overall_rms_mm_s: round(c.overall_rms_mm_s, 3),
      zone: z.channels[c.id]?.zone ?? null,
      sensor_ok: a.sensors.find((h) => h.id === c.id)?.ok ?? null,
      sensor_problems: a.sensors.find((h) => h.id === c.id)?.problems ?? [],
      sensor_faults: a.sensors.find((h) => h.id === c.id)?.faults.map((f) => f.code) ?? [],
      sensor_doubts: a.sensors.find((h) => h.id === c.id)?.doubts ?? [],
      one_x_share: round(c.one_x_share, 3),
      orders: Object.fromEntries(
        Object.entries(c.orders).map(([k, o]) => [
          k,
          {
            freq_hz: round(o.freq_hz, 3),
            amp_pk_mm_s: round(o.amp_pk_mm_s, 3),
            amp_rms_mm_s: round(o.amp_rms_mm_s, 3),
            phase_deg: round(o.phase_deg, 1),
          },
        ]),
      ),
      nonsync_peaks: c.nonsync_peaks.map((p) => ({
        freq_hz: round(p.freq_hz, 2),
        order: round(p.order, 3),
        amp_rms_mm_s: round(p.amp_rms_mm_s, 3),
      })),
      stats: {
        dc_v: round(c.stats.dc_v, 4),
        ac_rms_v: round(c.stats.ac_rms_v, 5),
        min_v: round(c.stats.min_v, 4),
        max_v: round(c.stats.max_v, 4),
        clipped_samples: c.stats.clipped_samples,
      },
    })),
    warnings: analysisWarnings(w, a),
    /** The DSP window itself, unrounded, for `turnwise condition learn-baseline --from`. */
    window: w,
  };
}

export function analysisTable(
  file: string,
  w: WindowResult,
  cfg: Config,
  a: WindowAssessment,
): string {
  const u = cfg.units;
  const orders = Object.keys(w.channels[0]?.orders ?? {});
  const header = [
    'sensor',
    `overall ${u} rms`,
    'zone',
    ...orders.flatMap((k) => [`${k}x ${u} pk`, `${k}x phase deg`]),
  ];
  const rows = w.channels.map((c) => [
    `${c.id} (${c.bearing} ${c.direction[0]!.toUpperCase()})`,
    fmtVel(c.overall_rms_mm_s, u),
    a.sensors.find((h) => h.id === c.id)?.ok === false
      ? 'not OK'
      : (a.zone.channels[c.id]?.zone ?? '-'),
    ...orders.flatMap((k) => {
      const o = c.orders[k];
      return [fmtVel(o?.amp_pk_mm_s, u), o ? o.phase_deg.toFixed(1) : '-'];
    }),
  ]);
  const head =
    `${file}: ${cfg.machine.id}, ` +
    `${((w.end_index - w.start_index) / w.sample_rate_hz).toFixed(1)} s ` +
    `at ${w.sample_rate_hz} Hz\n` +
    `speed ${w.speed_rpm?.toFixed(1)} r/min ` +
    `(${w.speed_min_rpm?.toFixed(1)}-${w.speed_max_rpm?.toFixed(1)}), ` +
    `${w.revolutions} revolutions averaged` +
    (w.revolutions_rejected ? `, ${w.revolutions_rejected} rejected` : '') +
    (`\noverall band ${w.band_hz.low}-${w.band_hz.high} Hz; ` +
      `phase = lag from the tach edge to the positive velocity peak\n\n`);
  const peaks = w.channels
    .filter((c) => c.nonsync_peaks.length > 0)
    .map(
      (c) =>
        `  ${c.id}: ` +
        c.nonsync_peaks
          .slice(0, 3)
          .map(
            (p) =>
              `${p.freq_hz.toFixed(1)} Hz (${p.order.toFixed(2)}x) ` +
              `${fmtVel(p.amp_rms_mm_s, u)} ${u} rms`,
          )
          .join(', '),
    );
  const z = a.zone;
  const verdict =
    `\n\nzone ${z.machine} (${z.limits.basis}: A/B ${fmtVel(z.limits.ab_mm_s, u)}, B/C ` +
    `${fmtVel(z.limits.bc_mm_s, u)}, C/D ${fmtVel(z.limits.cd_mm_s, u)} ${u} rms)` +
    (z.notes.length ? `\n${z.notes.map((n) => `  - ${n}`).join('\n')}` : '') +
    `\nunbalance: ${a.unbalance.kind} (confidence ${a.unbalance.confidence})\n` +
    a.unbalance.evidence.map((e) => `  - ${e}`).join('\n') +
    (a.unbalance.points_to.length
      ? `\npoints to:\n${a.unbalance.points_to.map((p) => `  - ${p.cause}: ${p.why}`).join('\n')}`
      : '') +
    (a.unbalance.limits.length
      ? `\nnot judged:\n${a.unbalance.limits.map((l) => `  - ${l}`).join('\n')}`
      : '') +
    (a.sensors.some((h) => !h.ok)
      ? `\nsensors not OK:\n${a.sensors
          .filter((h) => !h.ok)
          .map((h) => `  - ${h.id}: ${h.problems.join('; ')}`)
          .join('\n')}`
      : '');
  const warnings = analysisWarnings(w, a);
  const tail =
    verdict +
    (peaks.length ? `\n\nlargest non-synchronous peaks:\n${peaks.join('\n')}` : '') +
    (warnings.length ? `\n\nwarnings:\n${warnings.map((x) => `  - ${x}`).join('\n')}` : '');
  return head + table(header, rows) + tail + '\n';
}

export const analyzeCommand: Command = {
  name: 'analyze',
  usage,
  async run(argv) {
    const { file, config, json, pcmFullScaleV } = recordingArgs('analyze', usage, argv);
    const cfg = loadConfig(config);
    const w = await analyzeRecording(file, cfg, {
      pcmFullScaleV,
      progress: new Progress('analyze'),
    });
    // The stored baseline (learned at commissioning) when there is one, for the baseline-relative
    // alarm.
    const a = assessWindow(cfg, w, {
      baseline: new FileBaselineStore(cfg.state_dir).load() ?? undefined,
    });
    process.stdout.write(
      json
        ? JSON.stringify(analysisJson(file, w, a), null, 2) + '\n'
        : analysisTable(file, w, cfg, a),
    );
    return 0;
  },
};
