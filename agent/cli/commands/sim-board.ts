import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { loadConfig } from '../../config/load.js';
import { UserError } from '../../errors.js';
import { fmtVel, round, table } from '../../report/units.js';
import { numberOption, parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';
import { Progress } from '../progress.js';
import { parseSimTiming, simTimingArgs } from '../sim-options.js';
import { BoardEmulator, playRealtime } from '../../../drivers/serial/board-emulator.js';
import { frameLength, type SampleFormat } from '../../../drivers/serial/frame.js';
import { DEFAULT_GARBAGE_BYTES, FrameFaults } from '../../../drivers/serial/link-faults.js';
import { SocatLink, type SocatTarget } from '../../../drivers/serial/socat-link.js';
import { boardScales, SimBoardSignal } from '../../../drivers/sim/board-signal.js';
import {
  channelMap,
  formatAt,
  loadScenario,
  resolveScenario,
} from '../../../drivers/sim/scenario.js';
import { FanSimulator } from '../../../drivers/sim/simulator.js';

const usage =
  'turnwise sim-board --scenario S.yaml --config CFG.yaml [--link PATH | --device ' +
  'PATH [--baud N]] [--seconds N] [--from-day D] [--time-scale K] [--seed N] ' +
  '[--channels N] [--format int24|int16|float32] [--frame-samples N] [--tach-edges] ' +
  '[--garbage-every N [--garbage-bytes B]] [--corrupt-every ' +
  'N] [--link-drop-at S [--link-down-s D]] [--json]';

const DEFAULT_LINK = join(tmpdir(), 'turnwise-sim-board');
const FORMATS: readonly SampleFormat[] = ['int24', 'int16', 'float32'];

/**
 * The simulated fan playing the acquisition board over a serial link: frames of the serial
 * protocol, in real time, into a pseudo-terminal (or a serial device) that the agent opens as
 * `driver: serial`.
 */
export const simBoardCommand: Command = {
  name: 'sim-board',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('sim-board', usage, argv, {
      scenario: { type: 'string' },
      config: { type: 'string' },
      link: { type: 'string' },
      device: { type: 'string' },
      baud: { type: 'string' },
      seconds: { type: 'string' },
      ...simTimingArgs,
      channels: { type: 'string' },
      format: { type: 'string' },
      'frame-samples': { type: 'string' },
      'tach-edges': { type: 'boolean' },
      'garbage-every': { type: 'string' },
      'garbage-bytes': { type: 'string' },
      'corrupt-every': { type: 'string' },
      'link-drop-at': { type: 'string' },
      'link-down-s': { type: 'string' },
      json: { type: 'boolean' },
    });
    const fail = (what: string) => new UserError('turnwise sim-board', what, `usage: ${usage}`);
    if (positionals.length > 0) throw fail(`unexpected argument "${positionals[0]}"`);
    for (const k of ['scenario', 'config'] as const)
      if (!values[k]) throw fail(`--${k} is required`);
    if (values.link && values.device)
      throw fail(
        'give --link (make a pseudo-terminal) or --device (write to a serial device), not both',
      );
    if (values.baud && !values.device)
      throw fail('--baud applies to --device only (a pseudo-terminal has no line rate)');
    const num = (name: string, check: (v: number) => boolean, what: string) =>
      numberOption(
        'sim-board',
        usage,
        name,
        values[name as keyof typeof values] as string | undefined,
        check,
        what,
      );
    const seconds = num('seconds', (v) => v > 0, 'a duration in seconds above 0');
    const { fromDay, timeScale, seed } = parseSimTiming('sim-board', usage, values);
    const frameSamples =
      num(
        'frame-samples',
        (v) => Number.isInteger(v) && v >= 1 && v <= 65535,
        'a whole number of samples per channel from 1 to 65535',
      ) ?? 256;
    const everyN = (v: number) => Number.isInteger(v) && v >= 1 && v <= 1_000_000;
    const garbageEvery = num('garbage-every', everyN, 'a whole number of frames from 1 to 1000000');
    const garbageBytes = num(
      'garbage-bytes',
      (v) => Number.isInteger(v) && v >= 1 && v <= 65_536,
      'a whole number of bytes from 1 to 65536',
    );
    const corruptEvery = num('corrupt-every', everyN, 'a whole number of frames from 1 to 1000000');
    const linkDropAt = num(
      'link-drop-at',
      (v) => v >= 0,
      'seconds of signal from the start, 0 or more',
    );
    const linkDownS = num(
      'link-down-s',
      (v) => v > 0 && v <= 3600,
      'seconds, above 0 and at most 3600',
    );
    if (garbageBytes !== undefined && garbageEvery === undefined)
      throw fail('--garbage-bytes goes with --garbage-every (how often a burst is sent)');
    if (linkDownS !== undefined && linkDropAt === undefined)
      throw fail('--link-down-s goes with --link-drop-at (when the link drops)');
    if (linkDropAt !== undefined && values.device)
      throw fail(
        '--link-drop-at needs the pseudo-terminal (--link): a serial ' +
          'device given with --device cannot be removed and made again',
      );
    const format = (values.format ?? 'int24') as SampleFormat;
    if (!FORMATS.includes(format))
      throw new UserError(
        'turnwise sim-board --format',
        `expected one of ${FORMATS.join(', ')}, got "${values.format}"`,
        `usage: ${usage}`,
      );

    const cfg = loadConfig(values.config!);
    const plan = resolveScenario(
      loadScenario(values.scenario!),
      cfg,
      values.scenario!,
      values.config!,
    );
    // A config that already points the agent at a serial board says what that board sends.
    const acq = cfg.acquisition?.driver === 'serial' ? cfg.acquisition : undefined;
    const tachEdges = values['tach-edges'] === true || acq?.board_tach_edges === true;
    const channelsGiven = num(
      'channels',
      (v) => Number.isInteger(v) && v >= 1 && v <= 255,
      'a channel count from 1 to 255',
    );
    const channels = channelsGiven ?? acq?.channels ?? plan.channelCount;
    const channelsFrom =
      channelsGiven !== undefined
        ? 'turnwise sim-board --channels'
        : acq
          ? `${values.config}: acquisition.channels`
          : 'the channel map';
    const lastNeeded = Math.max(
      ...plan.sensors.map((s) => s.channel),
      tachEdges ? -1 : plan.tach.channel,
    );
    if (channels <= lastNeeded) {
      throw new UserError(
        channelsFrom,
        `the board would send ${channels} channel(s), but the config uses ` +
          `channel ${lastNeeded}${tachEdges ? '' : ' (sensors and tach)'}`,
        `send at least ${lastNeeded + 1} ` +
          `channels${tachEdges ? '' : ', or let the board time the tach (--tach-edges)'}`,
      );
    }
    if (acq && channels !== acq.channels) {
      throw new UserError(
        'turnwise sim-board --channels',
        `is ${channels} but ${values.config} tells the agent to expect ` +
          `${acq.channels} (acquisition.channels); the agent would reject every frame`,
        'leave --channels out, or change acquisition.channels',
      );
    }
    if (acq && acq.sample_rate_hz !== plan.sampleRate) {
      throw new UserError(
        `${values.config}: acquisition.sample_rate_hz`,
        `is ${acq.sample_rate_hz} Hz but the scenario samples at ${plan.sampleRate} Hz ` +
          `(${values.scenario}: sample_rate_hz); the agent would reject every frame`,
        'make the two equal',
      );
    }
    const baud =
      num(
        'baud',
        (v) => Number.isInteger(v) && v >= 300 && v <= 16_000_000,
        'a line rate in bits/s from 300 to 16000000',
      ) ??
      acq?.baud ??
      921_600;
    const target: SocatTarget = values.device
      ? { kind: 'device', path: values.device, baud }
      : { kind: 'pty', link: resolve(values.link ?? DEFAULT_LINK) };
    const where = target.kind === 'pty' ? target.link : target.path;

    const human = !values.json;
    const events: { at_s: number; text: string }[] = [];
    const sim = new FanSimulator(plan, {
      startS: fromDay * 86400,
      timeScale,
      seed,
      onEvent: (e) => {
        events.push({ at_s: e.at_s, text: e.text });
        if (human) process.stderr.write(`${process.stderr.isTTY ? '\r\x1b[K' : ''}${e.text}\n`);
      },
    });
    const startAt = sim.scenarioTimeS;
    const speedStart = sim.speedRpm;
    const board = new BoardEmulator(
      new SimBoardSignal(sim, { channelCount: channels, maxBlock: frameSamples }),
      {
        sampleRateHz: plan.sampleRate,
        samplesPerFrame: frameSamples,
        format,
        scaleVPerCount: boardScales(plan, channels, format),
        tachTimed: tachEdges,
      },
    );

    const faults = new FrameFaults({
      garbageEvery,
      garbageBytes,
      corruptEvery,
      seed: seed ?? plan.seed,
    });
    const drop = linkDropAt === undefined ? null : { atS: linkDropAt, downS: linkDownS ?? 2 };
    const note = (text: string) =>
      process.stderr.write(`${process.stderr.isTTY ? '\r\x1b[K' : ''}${text}\n`);

    let stopRequested = false;
    const onSignal = () => {
      stopRequested = true;
    };
    process.on('SIGINT', onSignal);
    process.on('SIGTERM', onSignal);
    let link: SocatLink | undefined;
    // a second of frames may wait for socat: a stall of this process or of the reader loses nothing
    const linkOptions = {
      maxBacklogBytes:
        (frameLength(channels, frameSamples, format, 0) * plan.sampleRate) / frameSamples,
    };
    try {
      link = await SocatLink.start(target, linkOptions);
      const used = channelMap(plan, cfg).filter(
        (c) => c.channel < channels && (c.id !== 'tach' || !tachEdges),
      );
      const unused = channels - plan.channelCount;
      const agentSide = (device: string) =>
        `acquisition: {driver: serial, device: ` +
        `${device}, sample_rate_hz: ${plan.sampleRate}, channels: ` +
        `${channels}${tachEdges ? ', board_tach_edges: true' : ''}}`;
      process.stderr.write(
        `simulated board streaming on ${where}: ${channels} channel(s) x ` +
          `${plan.sampleRate} Hz, ${format}, ${frameSamples} samples per frame, ` +
          `tach ` +
          `${tachEdges ? 'edges timed by the board' : `on channel ${plan.tach.channel}`}; ` +
          `scenario "${plan.name}" from ${formatAt(startAt)}\n` +
          `  channels: ${used.map((c) => `${c.channel}=${c.id}`).join(' ')}` +
          (unused > 0
            ? ` ` +
              `(${unused === 1 ? `channel ${plan.channelCount}` : `channels ${plan.channelCount}-${channels - 1}`} ` +
              `unused, 0 V)`
            : '') +
          '\n' +
          (target.kind === 'pty'
            ? `  point the agent at it with:\n    ${agentSide(where)}\n`
            : `  the agent reads the other end of this serial ` +
              `line:\n    ${agentSide('<that device>')}\n`) +
          (speedStart < 1
            ? `  the fan stands still at ${formatAt(startAt)}: ` +
              `--from-day D starts the scenario where it runs\n`
            : '') +
          (faults.active || drop
            ? `  faults injected: ${faultWords(garbageEvery, garbageBytes, corruptEvery, drop)}\n`
            : '') +
          `  ${seconds !== undefined ? `stops after ${seconds} s; ` : ''}Ctrl-C stops it\n`,
      );
      const progress = new Progress('sim-board');
      const framePeriodMs = (frameSamples / plan.sampleRate) * 1000;
      const maxFrames =
        seconds !== undefined ? Math.ceil((seconds * plan.sampleRate) / frameSamples) : Infinity;
      let frames = 0;
      let sent = 0;
      let dropped = 0;
      let unsent = 0;
      let linkDrops = 0;
      let downUntilS: number | null = null;
      const t0 = performance.now();
      await playRealtime(
        board,
        {
          write: async (bytes) => {
            const atS = (frames * frameSamples) / plan.sampleRate;
            frames++;
            if (drop && linkDrops === 0 && atS >= drop.atS) {
              // the link goes away: socat stops and removes it, the agent sees its device vanish;
              // the board samples on
              await link!.stop();
              link = undefined;
              linkDrops++;
              downUntilS = atS + drop.downS;
              note(
                `link dropped at ${atS.toFixed(2)} s of signal: ` +
                  `${where} removed, made again in ${drop.downS} s`,
              );
            }
            if (downUntilS !== null && atS >= downUntilS) {
              link = await SocatLink.start(target, linkOptions);
              downUntilS = null;
              note(`link back at ${atS.toFixed(2)} s of signal: ${where} made again`);
            }
            if (!link) unsent++;
            else if (link.write(faults.apply(bytes))) sent++;
            else dropped++;
            const elapsed = (frames * frameSamples) / plan.sampleRate;
            progress.update(
              frames,
              seconds !== undefined ? maxFrames : 0,
              `${elapsed.toFixed(1)} s, ${dropped} frame(s) ` +
                `dropped, speed ${sim.speedRpm.toFixed(1)} r/min`,
            );
          },
        },
        framePeriodMs,
        () => stopRequested || frames >= maxFrames,
      );
      progress.done();
      const socat = link ? await link.stop() : null;
      const elapsedS = (performance.now() - t0) / 1000;
      const summary = {
        target: target.kind,
        path: where,
        scenario: plan.name,
        sample_rate_hz: plan.sampleRate,
        channels,
        format,
        samples_per_frame: frameSamples,
        tach_edges_in_frames: tachEdges,
        frames_sent: sent,
        frames_dropped: dropped,
        frames_unsent_link_down: unsent,
        link_drops: linkDrops,
        garbage_bursts: faults.garbageBursts,
        garbage_bytes: faults.garbageBytes,
        frames_corrupted: faults.corruptedFrames,
        signal_s: round((frames * frameSamples) / plan.sampleRate, 3),
        elapsed_s: round(elapsedS, 3),
        from_day: fromDay,
        time_scale: timeScale,
        start_at: formatAt(startAt),
        end_at: formatAt(sim.scenarioTimeS),
        speed_start_rpm: round(speedStart, 2),
        speed_end_rpm: round(sim.speedRpm, 2),
        stopped_by: stopRequested ? 'signal' : 'seconds',
        socat_exit: socat ? (socat.code ?? socat.signal) : null,
        events,
        model_1x_end: sim.modelOrder(1).map((m) => ({
          id: m.id,
          amp_pk_mm_s: round(m.amp_pk_mm_s, 4),
          amp_rms_mm_s: round(m.amp_pk_mm_s / Math.SQRT2, 4),
          phase_deg: round(m.phase_deg, 2),
        })),
      };
      if (values.json) process.stdout.write(JSON.stringify(summary, null, 2) + '\n');
      else {
        process.stdout.write(
          `streamed ${summary.signal_s} s of signal in ${summary.elapsed_s} s: ` +
            `${summary.frames_sent} frame(s) sent, ${summary.frames_dropped} dropped ` +
            `(nobody reading, or the reader fell behind)\n` +
            (faults.active || drop
              ? `faults injected: ${summary.garbage_bursts} garbage ` +
                `burst(s) (${summary.garbage_bytes} bytes), ` +
                `${summary.frames_corrupted} frame(s) with a bad CRC, ` +
                `${summary.link_drops} link drop(s) ` +
                `(${summary.frames_unsent_link_down} frame(s) not sent while down)\n`
              : '') +
            (`scenario time ${summary.start_at} to ${summary.end_at}; speed ` +
              `${summary.speed_end_rpm} r/min at the end; ${events.length} timeline event(s)\n`) +
            `model 1x at the end (phase = lag from the ` +
            `tach edge to the positive velocity peak):\n\n` +
            table(
              ['id', `1x ${cfg.units} rms`, '1x phase deg'],
              summary.model_1x_end.map((m) => [
                m.id,
                fmtVel(m.amp_rms_mm_s, cfg.units),
                m.phase_deg != null ? m.phase_deg.toFixed(0) : '-',
              ]),
            ) +
            '\n',
        );
      }
      return 0;
    } finally {
      await link?.stop();
      process.off('SIGINT', onSignal);
      process.off('SIGTERM', onSignal);
    }
  },
};

/** The injected faults in words, for the start-up lines. */
function faultWords(
  garbageEvery: number | undefined,
  garbageBytes: number | undefined,
  corruptEvery: number | undefined,
  drop: { atS: number; downS: number } | null,
): string {
  const parts: string[] = [];
  if (garbageEvery !== undefined)
    parts.push(
      `${garbageBytes ?? DEFAULT_GARBAGE_BYTES} garbage bytes after ` +
        `every ${garbageEvery === 1 ? 'frame' : `${garbageEvery} frames`}`,
    );
  if (corruptEvery !== undefined)
    parts.push(
      `one bit flipped (bad CRC) in ` +
        `${corruptEvery === 1 ? 'every frame' : `one frame in ${corruptEvery}`}`,
    );
  if (drop)
    parts.push(`the link removed at ${drop.atS} s of signal and made again ${drop.downS} s later`);
  return parts.join('; ');
}
