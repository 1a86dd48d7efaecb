/**
 * Benchmark of the CLI as a user starts it (not a test): the second half of `npm run bench`.
 *
 * Each command is the compiled CLI spawned as a fresh process, as a shell or systemd starts it;
 * the figure is the median wall time of N runs (wall time includes Node's own start-up, which is
 * measured too as `node -e 0`, so the CLI's share can be read off). The machine may be shared:
 * the load average before and after is printed beside the figures.
 *
 * 1. `turnwise --help` (target: under 0.1 s): nothing but the command list may load.
 * 2. `turnwise check-config config/example.yaml` (target: under 0.2 s): the config schema (zod)
 *    and the YAML parser load, nothing of MQTT, the broker, serial ports or the DSP.
 * 3. `turnwise analyze` of a 60 s, 7-channel (6 sensors + tach), 25.6 kHz float32 recording
 *    against test/bench/peer_analyze.py, a plain numpy/scipy script doing the same job on the same
 *    file (target: turnwise at most 0.5 x the peer's time).
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { loadavg, tmpdir, cpus } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { synthesize } from '../support/synth.js';
import { writeFloatWav } from '../support/wav.js';

const log = (s: string) => process.stderr.write(s + '\n');
const cli = fileURLToPath(new URL('../../agent/cli/main.js', import.meta.url));
const exampleConfig = fileURLToPath(new URL('../../../config/example.yaml', import.meta.url));
const peer = fileURLToPath(new URL('../../../test/bench/peer_analyze.py', import.meta.url));
const python = process.env.TURNWISE_PYTHON ?? 'python3';

/**
 * CPU seconds (user + system) of the children this process has waited for, from /proc/self/stat
 * (cutime + cstime, in clock ticks of 1/100 s on Linux); null where /proc is not there.
 */
function childCpuS(): number | null {
  try {
    const stat = readFileSync('/proc/self/stat', 'utf8');
    const f = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    // Fields after the command name start at field 3 (state); cutime and cstime are fields
    // 16 and 17.
    return (Number(f[16 - 3]) + Number(f[17 - 3])) / 100;
  } catch {
    return null;
  }
}

/**
 * NODE_EXTRA_CA_CERTS makes every Node process read and parse a CA bundle at start (50-90 ms on
 * the development machine, where the session sets it): not part of turnwise, and not set on a
 * board. The children run without it; its cost is printed once beside the figures.
 */
const extraCa = process.env.NODE_EXTRA_CA_CERTS;
const childEnv = { ...process.env };
delete childEnv.NODE_EXTRA_CA_CERTS;

function once(
  cmd: string,
  args: string[],
  env: NodeJS.ProcessEnv = childEnv,
): { wallS: number; cpuS: number | null; out: string } {
  const c0 = childCpuS();
  const t0 = performance.now();
  const r = spawnSync(cmd, args, { encoding: 'utf8', maxBuffer: 64 * 2 ** 20, env });
  const wallS = (performance.now() - t0) / 1000;
  const c1 = childCpuS();
  if (r.status !== 0)
    throw new Error(
      `${cmd} ${args.join(' ')} failed (exit ${r.status}): ` +
        `${(r.stderr ?? '') + (r.error ? String(r.error) : '')}`,
    );
  return { wallS, cpuS: c0 === null || c1 === null ? null : c1 - c0, out: r.stdout };
}

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
};

/**
 * Median wall time of `runs` runs after one untimed run (file cache warm), and mean CPU time per
 * run.
 */
function timed(
  cmd: string,
  args: string[],
  runs: number,
  env: NodeJS.ProcessEnv = childEnv,
): { medianS: number; minS: number; cpuS: number | null; out: string } {
  const first = once(cmd, args, env);
  const r = Array.from({ length: runs }, () => once(cmd, args, env));
  const t = r.map((x) => x.wallS);
  const cpu = r.every((x) => x.cpuS !== null) ? r.reduce((a, x) => a + x.cpuS!, 0) / runs : null;
  return { medianS: median(t), minS: Math.min(...t), cpuS: cpu, out: first.out };
}

const ms = (s: number) => `${(s * 1000).toFixed(0)} ms`;
const fig = (t: { medianS: number; minS: number; cpuS: number | null }, runs: number) =>
  `${ms(t.medianS)} wall, median of ${runs} (min ${ms(t.minS)}); ` +
  `CPU ${t.cpuS === null ? 'n/a' : ms(t.cpuS)} per run`;
const load = () =>
  loadavg()
    .map((x) => x.toFixed(2))
    .join(' ');

const loadBefore = load();
log(`bench: start-up, ${cpus().length} cores, load average ${loadBefore}`);
const N = 21;
const bare = timed(process.execPath, ['-e', '0'], N);
const help = timed(process.execPath, [cli, '--help'], N);
if (!/check-config/.test(help.out)) throw new Error('turnwise --help did not list the commands');
const check = timed(process.execPath, [cli, 'check-config', exampleConfig], N);
if (!/: OK\n/.test(check.out))
  throw new Error(`turnwise check-config did not pass config/example.yaml:\n${check.out}`);

console.log(`node -e 0 (Node's own start-up, for reference): ${fig(bare, N)}`);
if (extraCa) {
  const withCa = timed(process.execPath, ['-e', '0'], N, process.env);
  console.log(
    `  (NODE_EXTRA_CA_CERTS is set here; the figures are ` +
      `without it: with it, node -e 0 takes ${fig(withCa, N)})`,
  );
}
console.log(
  `turnwise --help:                                ${fig(help, N)}   target < 100 ms wall`,
);
console.log(
  `turnwise check-config config/example.yaml:      ${fig(check, N)}   target < 200 ms wall`,
);

const dir = mkdtempSync(join(tmpdir(), 'tw-bench-'));
try {
  const fs = 25600;
  const rec = join(dir, 'rec60.wav');
  log('bench: writing a 60 s, 7-channel (6 sensors + tach) 25.6 kHz recording ...');
  const sensors = Array.from({ length: 6 }, (_, i) => ({
    orders: [{ order: 1, velPk: 4 + i, phaseDeg: 40 * i }],
    noiseMmS2: 200,
  }));
  writeFloatWav(
    rec,
    fs,
    synthesize({ sampleRate: fs, seconds: 60, rpm: () => 1485, channels: sensors, tachChannel: 6 }),
  );
  const cfgFile = join(dir, 'cfg.yaml');
  writeFileSync(
    cfgFile,
    `machine: {id: bench, group: 2, support: rigid, rated_rpm: ` +
      `1485}\ntach: {channel: 6, trigger_v: 2.5}\nsensors:\n` +
      sensors
        .map(
          (_, i) =>
            `  - {id: S${i}, channel: ${i}, bearing: ${i < 3 ? 'DE' : 'NDE'}, direction: ` +
            `vertical, sensitivity_mv_per_g: 100}`,
        )
        .join('\n') +
      '\n',
  );
  const R = 5;
  const tw = timed(process.execPath, [cli, 'analyze', rec, '--config', cfgFile, '--json'], R);
  let py: ReturnType<typeof timed> | null = null;
  try {
    py = timed(python, [peer, rec, '6', '100'], R);
  } catch (e) {
    log(
      `bench: numpy/scipy peer not run (${python} with numpy and scipy is ` +
        `needed): ${(e as Error).message.split('\n').slice(-2).join(' ')}`,
    );
  }
  console.log(`turnwise analyze, 60 s x 7 ch at 25.6 kHz:      ${fig(tw, R)}`);
  if (py) {
    const a = JSON.parse(tw.out).channels[0].orders['1'];
    const b = JSON.parse(py.out).channels[0].orders['1'];
    console.log(`numpy/scipy peer (test/bench/peer_analyze.py):  ${fig(py, R)}`);
    const cpuRatio =
      tw.cpuS !== null && py.cpuS !== null ? `, CPU ${(tw.cpuS / py.cpuS).toFixed(2)} x` : '';
    console.log(
      `turnwise / peer: wall ${(tw.medianS / py.medianS).toFixed(2)} x ` +
        `(target <= 0.5 x)${cpuRatio}; 1x on S0: turnwise ` +
        `${a.amp_pk_mm_s} mm/s @ ${a.phase_deg} deg, peer ` +
        `${b.amp_pk_mm_s.toFixed(3)} mm/s @ ${b.phase_deg.toFixed(1)} deg`,
    );
  }
} finally {
  rmSync(dir, { recursive: true, force: true });
}
console.log(
  `load average before ${loadBefore}, after ${load()} (${cpus().length} cores): ` +
    `figures are wall times and grow with the load`,
);
