import { loadConfig } from '../../config/load.js';
import { UserError } from '../../errors.js';
import { fmtVel, round, table, type DisplayUnits } from '../../report/units.js';
import { numberOption, parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';
import { Progress } from '../progress.js';
import { parseSimTiming, simTimingArgs } from '../sim-options.js';
import {
  channelMap,
  formatAt,
  loadScenario,
  resolveScenario,
} from '../../../drivers/sim/scenario.js';
import { FanSimulator } from '../../../drivers/sim/simulator.js';
import type { AppliedEvent } from '../../../drivers/sim/state.js';
import { maxWavFrames, WavWriter } from '../../../drivers/wav/writer.js';

const usage =
  'turnwise simulate --scenario S.yaml --config CFG.yaml --out REC.wav ' +
  '--seconds N [--from-day D] [--time-scale K] [--seed N] [--json]';

/** Samples per channel rendered and written at a time. */
const BLOCK = 8192;

export const simulateCommand: Command = {
  name: 'simulate',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('simulate', usage, argv, {
      scenario: { type: 'string' },
      config: { type: 'string' },
      out: { type: 'string' },
      seconds: { type: 'string' },
      ...simTimingArgs,
      json: { type: 'boolean' },
    });
    if (positionals.length > 0)
      throw new UserError(
        'turnwise simulate',
        `unexpected argument "${positionals[0]}"`,
        `usage: ${usage}`,
      );
    for (const k of ['scenario', 'config', 'out', 'seconds'] as const) {
      if (!values[k])
        throw new UserError('turnwise simulate', `--${k} is required`, `usage: ${usage}`);
    }
    const seconds = numberOption(
      'simulate',
      usage,
      'seconds',
      values.seconds,
      (v) => v > 0,
      'a duration in seconds above 0',
    )!;
    const { fromDay, timeScale, seed } = parseSimTiming('simulate', usage, values);

    const cfg = loadConfig(values.config!);
    const plan = resolveScenario(
      loadScenario(values.scenario!),
      cfg,
      values.scenario!,
      values.config!,
    );
    const frames = Math.round(seconds * plan.sampleRate);
    if (frames > maxWavFrames(plan.channelCount)) {
      throw new UserError(
        'turnwise simulate --seconds',
        `${seconds} s of ${plan.channelCount} channels at ` +
          `${plan.sampleRate} Hz would pass the 4 GiB limit of a WAV file`,
        `record at most ` +
          `${Math.floor(maxWavFrames(plan.channelCount) / plan.sampleRate)} s per file`,
      );
    }

    const events: AppliedEvent[] = [];
    const progress = new Progress('simulating');
    const human = !values.json;
    const sim = new FanSimulator(plan, {
      startS: fromDay * 86400,
      timeScale,
      seed,
      onEvent: (e) => {
        events.push(e);
        if (human) process.stderr.write(`${process.stderr.isTTY ? '\r\x1b[K' : ''}${e.text}\n`);
      },
    });
    const startS = sim.scenarioTimeS;
    const speedStart = sim.speedRpm;
    const channels = channelMap(plan, cfg);
    const writer = await WavWriter.create(values.out!, {
      sampleRate: plan.sampleRate,
      channelCount: plan.channelCount,
      comment:
        `turnwise simulate: ${plan.name}; from ${formatAt(startS)}; channels: ` +
        `${channels.map((c) => `${c.channel}=${c.id}`).join(' ')}; volts`,
    });

    const buffers = Array.from({ length: plan.channelCount }, () => new Float32Array(BLOCK));
    const t0 = performance.now();
    let done = 0;
    try {
      while (done < frames) {
        const n = Math.min(BLOCK, frames - done);
        sim.render(buffers, n);
        await writer.write(buffers, n);
        done += n;
        progress.update(done, frames, `${(done / plan.sampleRate).toFixed(1)} of ${seconds} s`);
      }
    } finally {
      const bytes = await writer.close();
      progress.done();
      const elapsed = (performance.now() - t0) / 1000;
      const model = sim.modelOrder(1);
      const summary = {
        file: values.out!,
        scenario: plan.name,
        sample_rate_hz: plan.sampleRate,
        channels: plan.channelCount,
        frames: done,
        duration_s: done / plan.sampleRate,
        bytes,
        from_day: fromDay,
        time_scale: timeScale,
        start_at: formatAt(startS),
        end_at: formatAt(sim.scenarioTimeS),
        speed_start_rpm: round(speedStart, 2),
        speed_end_rpm: round(sim.speedRpm, 2),
        channel_map: channels.map((c) => ({ channel: c.channel, id: c.id, what: c.what })),
        events: events.map((e) => ({ at_s: e.at_s, text: e.text })),
        model_1x_end: model.map((m) => ({
          id: m.id,
          amp_pk_mm_s: round(m.amp_pk_mm_s, 4),
          amp_rms_mm_s: round(m.amp_pk_mm_s / Math.SQRT2, 4),
          phase_deg: round(m.phase_deg, 2),
        })),
        elapsed_s: round(elapsed, 3),
        realtime_factor: round(done / plan.sampleRate / elapsed, 1),
      };
      if (done === frames) {
        if (values.json) process.stdout.write(JSON.stringify(summary, null, 2) + '\n');
        else process.stdout.write(humanSummary(summary, cfg.units));
      }
    }
    return 0;
  },
};

type Summary = {
  file: string;
  duration_s: number;
  channels: number;
  sample_rate_hz: number;
  bytes: number;
  start_at: string;
  end_at: string;
  speed_start_rpm: number | null;
  speed_end_rpm: number | null;
  channel_map: { channel: number; id: string; what: string }[];
  model_1x_end: {
    id: string;
    amp_pk_mm_s: number | null;
    amp_rms_mm_s: number | null;
    phase_deg: number | null;
  }[];
  events: { text: string }[];
  elapsed_s: number | null;
  realtime_factor: number | null;
};

function humanSummary(s: Summary, units: DisplayUnits): string {
  const rows = s.channel_map.map((c) => {
    const m = s.model_1x_end.find((x) => x.id === c.id);
    return [
      String(c.channel),
      c.id,
      c.what,
      m ? fmtVel(m.amp_rms_mm_s, units) : '-',
      m?.phase_deg != null ? m.phase_deg.toFixed(0) : '-',
    ];
  });
  return (
    `wrote ${s.file}: ${s.duration_s.toFixed(1)} s, ${s.channels} channels x ` +
    `${s.sample_rate_hz} Hz, float32 volts, ${(s.bytes / 1e6).toFixed(1)} MB\n` +
    `scenario time ${s.start_at} to ${s.end_at}; speed ${s.speed_start_rpm?.toFixed(1)} ` +
    `r/min at start, ${s.speed_end_rpm?.toFixed(1)} r/min at end\n` +
    `model 1x at the end (phase = lag from the tach edge to the positive velocity peak):\n\n` +
    table(['channel', 'id', 'what', `1x ${units} rms`, '1x phase deg'], rows) +
    `\n\n${s.events.length} timeline event(s) during the recording\n` +
    (`simulated ${s.duration_s.toFixed(1)} s in ` +
      `${s.elapsed_s?.toFixed(2)} s (${s.realtime_factor}x real time)\n`)
  );
}
