import { loadConfig } from '../../config/load.js';
import { UserError } from '../../errors.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';

const usage =
  'turnwise probe-serial [--device PATH | --config CFG.yaml] [--baud N] [--seconds S] [--json]';

function num(v: string | undefined, name: string, dflt: number): number {
  if (v === undefined) return dflt;
  const n = Number(v);
  if (!(n > 0) || !Number.isFinite(n))
    throw new UserError(
      `turnwise probe-serial --${name}`,
      `"${v}" is not a positive number`,
      `usage: ${usage}`,
    );
  return n;
}

export const probeSerialCommand: Command = {
  name: 'probe-serial',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('probe-serial', usage, argv, {
      device: { type: 'string' },
      config: { type: 'string' },
      baud: { type: 'string' },
      seconds: { type: 'string' },
      json: { type: 'boolean' },
    });
    if (positionals.length > 0)
      throw new UserError(
        'turnwise probe-serial',
        `unexpected argument "${positionals[0]}"`,
        `usage: ${usage}`,
      );
    const configured = values.config ? loadConfig(values.config).acquisition : undefined;
    if (configured && configured.driver !== 'serial' && !values.device) {
      throw new UserError(
        `${values.config}: acquisition.driver`,
        `is "${configured.driver}", not "serial": there is no board device in this config`,
        'give the board with --device PATH, or use a config with acquisition.driver: serial',
      );
    }
    const acq = configured?.driver === 'serial' ? configured : undefined;
    const device = values.device ?? acq?.device;
    const baud = num(values.baud, 'baud', acq?.baud ?? 921_600);
    const seconds = num(values.seconds, 'seconds', 5);

    if (!device) {
      const { listPorts } = await import('../../../drivers/serial/ports.js');
      const l = await listPorts();
      if (values.json) {
        process.stdout.write(
          JSON.stringify(
            { stable: l.stable, detailed: l.detailed, list_error: l.listError },
            null,
            2,
          ) + '\n',
        );
        return 0;
      }
      const lines = ['Stable device links (use one of these as acquisition.device):'];
      lines.push(
        ...(l.stable.length
          ? l.stable.map((p) => `  ${p.path} -> ${p.target ?? '(dangling)'}`)
          : ['  none under /dev/serial/by-id (no USB serial device plugged in?)']),
      );
      lines.push('Serial ports:');
      lines.push(
        ...(l.detailed.length
          ? l.detailed.map(
              (p) =>
                `  ${p.path}  ` +
                `${[p.manufacturer, p.vendorId && `${p.vendorId}:${p.productId}`, p.serialNumber && `serial ${p.serialNumber}`].filter(Boolean).join(', ')}`,
            )
          : ['  none found']),
      );
      if (l.listError) lines.push(`note: ${l.listError}`);
      lines.push('Listen to one with: turnwise probe-serial --device PATH');
      process.stdout.write(lines.join('\n') + '\n');
      return 0;
    }

    const { probeSerial } = await import('../../../drivers/serial/probe.js');
    process.stderr.write(`listening to ${device} for ${seconds} s...\n`);
    const r = await probeSerial(
      device,
      baud,
      seconds,
      (m) => process.stderr.write(`  ${m}\n`),
      acq
        ? { maxSamplesPerChannel: acq.max_samples_per_channel, maxFrameBytes: acq.max_frame_bytes }
        : undefined,
    );
    const mismatch: string[] = [];
    if (acq) {
      // Every format seen, not only the first: a board that changes format mid-stream shows each.
      const tolPpm = acq.sample_rate_tolerance_ppm;
      for (const f of r.formats_seen) {
        const what = `${f.frames} frame(s) from sequence ${f.first_sequence}`;
        if (acq.channels !== f.channels)
          mismatch.push(
            `${what}: the board sends ${f.channels} channel(s), ` +
              `acquisition.channels is ${acq.channels}`,
          );
        const ppm = ((f.sample_rate_hz - acq.sample_rate_hz) / acq.sample_rate_hz) * 1e6;
        if (Math.abs(ppm) > tolPpm)
          mismatch.push(
            `${what}: the board samples at ${f.sample_rate_hz} Hz, ` +
              `${ppm.toFixed(0)} ppm from acquisition.sample_rate_hz ` +
              `${acq.sample_rate_hz}, beyond sample_rate_tolerance_ppm ${tolPpm}`,
          );
        if (acq.board_tach_edges !== f.tach_timed)
          mismatch.push(
            `${what}: tach ` +
              `${f.tach_timed ? 'timed by the board' : 'not timed by the board'} but ` +
              `acquisition.board_tach_edges is ${acq.board_tach_edges}`,
          );
      }
    }
    const c = r.counters;
    const ok = c.frames_ok > 0 && mismatch.length === 0;
    if (values.json) {
      process.stdout.write(
        JSON.stringify({ ok, ...r, config_mismatches: mismatch }, null, 2) + '\n',
      );
      return ok ? 0 : 1;
    }
    const f = r.format;
    const describe = (x: (typeof r.formats_seen)[number]) =>
      `v${x.protocol_version}, ${x.channels} channel(s), ` +
      `${x.sample_format}, ${x.samples_per_frame} samples/frame, ${x.sample_rate_hz} Hz, ` +
      `tach ${x.tach_timed ? 'timed by the board' : 'not timed (edges found on a channel)'}` +
      (x.sample_delay_ticks !== null
        ? `, ADC delay ${x.sample_delay_ticks} ticks, tach delay ` +
          `${x.tach_delay_ticks} ticks, skew up to ${x.max_skew_ticks} ticks`
        : x.protocol_version === 1
          ? ', no timing declared (version 1)'
          : '') +
      ` (${x.frames} frame(s) from sequence ${x.first_sequence})`;
    const formatRows: [string, string][] = r.formats_seen.length
      ? r.formats_seen.map((x, i) => [i === 0 ? 'formats seen' : '', describe(x)])
      : [['formats seen', 'no good frame received']];
    const rows: [string, string][] = [
      ['device', device],
      ['listened', `${r.listened_s.toFixed(1)} s`],
      ['modem lines', `DTR and RTS ${r.modem_lines}`],
      ...formatRows,
      [
        'sample rate',
        f
          ? `${f.sample_rate_hz} Hz ` +
            `declared${r.measured_rate_hz !== null ? `, ${r.measured_rate_hz.toFixed(0)} Hz measured by the wall clock` : ''}`
          : '-',
      ],
      ['frames ok', String(c.frames_ok)],
      [
        'bytes received',
        `${c.bytes_received} (${(c.bytes_received / r.listened_s / 1000).toFixed(1)} kB/s)`,
      ],
      [
        'crc errors / bad lengths / bad headers',
        `${c.crc_errors} / ${c.bad_lengths} / ${c.bad_headers}`,
      ],
      ['resyncs / bytes skipped', `${c.resyncs} / ${c.bytes_skipped}`],
      ['gaps / samples lost', `${c.gaps} / ${c.samples_lost}`],
      [
        'sequence anomalies / clock restarts / timing faults',
        `${c.sequence_anomalies} / ${c.clock_restarts} / ${c.timing_faults}`,
      ],
      ['tach edges', String(r.tach_edges)],
    ];
    const w = Math.max(...rows.map((x) => x[0].length));
    const out = rows.map(([k, v]) => `${k.padEnd(w)}  ${v}`);
    if (r.gap_list.length)
      out.push(
        `gaps (${r.gap_list.length}${r.gap_list.length < c.gaps ? ` of ${c.gaps}` : ''}):`,
        ...r.gap_list.map(
          (g) => `  ${g.from_index} .. ${g.to_index} (${g.samples} samples): ${g.reason}`,
        ),
      );
    for (const m of mismatch) out.push(`MISMATCH: ${m}`);
    if (r.problems.length) out.push('first problems:', ...r.problems.map((p) => `  ${p}`));
    if (c.frames_ok === 0)
      out.push(
        c.bytes_received === 0
          ? 'nothing received: is the board powered and streaming? is this the right device?'
          : 'bytes arrived but no valid frame: check the baud rate ' +
              'and that the firmware speaks drivers/serial/PROTOCOL.md',
      );
    process.stdout.write(out.join('\n') + '\n');
    return ok ? 0 : 1;
  },
};
