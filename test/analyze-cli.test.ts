import { beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { synthesize } from './support/synth.js';
import { writeFloatWav } from './support/wav.js';
import { expectNoStack, runCli } from './support/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'tw-analyze-'));
const cfgFile = join(dir, 'fan.yaml');
const rec = join(dir, 'rec.wav');
const fs = 25600;

function cfgYaml(
  over: { tachChannel?: number; sensorChannel?: number; maxRpm?: number; ppr?: number } = {},
): string {
  return `machine: {id: test-fan, group: 2, support: rigid, rated_rpm: 1485}
tach: {channel: ${over.tachChannel ?? 2}, trigger_v: 2.5${over.maxRpm ? `, max_rpm: ${over.maxRpm}` : ''}${over.ppr ? `, pulses_per_rev: ${over.ppr}` : ''}}
sensors:
  - {id: DE-V, channel: ${over.sensorChannel ?? 0}, bearing: DE, direction: vertical, sensitivity_mv_per_g: 100}
  - {id: DE-H, channel: 1, bearing: DE, direction: horizontal, sensitivity_mv_per_g: 100}
`;
}

const NDE_SENSORS =
  '  - {id: NDE-V, channel: 2, bearing: NDE, direction: vertical, ' +
  'sensitivity_mv_per_g: 100}\n  - {id: NDE-H, channel: 3, bearing: ' +
  'NDE, direction: horizontal, sensitivity_mv_per_g: 100}\n';

/**
 * Static unbalance on a centre-hung rotor at 1485 r/min, once-per-turn tach on channel 4: both
 * bearings move in phase, H lags V by 90 degrees at each bearing (common practice). Returns the
 * WAV's path.
 */
function writeStaticRecord(name: string): string {
  const sig = synthesize({
    sampleRate: fs,
    seconds: 12,
    rpm: () => 1485,
    channels: [
      { orders: [{ order: 1, velPk: 6.0, phaseDeg: 40 }], noiseMmS2: 100 },
      { orders: [{ order: 1, velPk: 5.0, phaseDeg: 130 }], noiseMmS2: 100 },
      { orders: [{ order: 1, velPk: 5.5, phaseDeg: 45 }], noiseMmS2: 100 },
      { orders: [{ order: 1, velPk: 4.8, phaseDeg: 137 }], noiseMmS2: 100 },
    ],
    tachChannel: 4,
  });
  const f = join(dir, name);
  writeFloatWav(f, fs, sig);
  return f;
}

beforeAll(() => {
  const sig = synthesize({
    sampleRate: fs,
    seconds: 12,
    rpm: () => 1485,
    channels: [
      {
        orders: [
          { order: 1, velPk: 6.0, phaseDeg: 40 },
          { order: 2, velPk: 0.35, phaseDeg: 75 },
        ],
        noiseMmS2: 100,
      },
      { orders: [{ order: 1, velPk: 5.0, phaseDeg: 130 }], noiseMmS2: 100 },
    ],
    tachChannel: 2,
  });
  writeFloatWav(rec, fs, sig);
  writeFileSync(cfgFile, cfgYaml());
});

describe('turnwise analyze', () => {
  it('prints the JSON contract', () => {
    const r = runCli(['analyze', rec, '--config', cfgFile, '--json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.speed_rpm).toBeCloseTo(1485, 0);
    expect(j.revolutions).toBeGreaterThan(290);
    const de = j.channels.find((c: { id: string }) => c.id === 'DE-V');
    expect(de.orders['1'].amp_pk_mm_s).toBeCloseTo(6.0, 1);
    expect(de.orders['1'].amp_rms_mm_s).toBeCloseTo(6.0 / Math.SQRT2, 1);
    expect(de.orders['1'].phase_deg).toBeCloseTo(40, 0);
    expect(de.orders['2'].phase_deg).toBeCloseTo(75, 0);
    expect(de.overall_rms_mm_s).toBeGreaterThan(4.2);
    expect(de.overall_rms_mm_s).toBeLessThan(4.4);
    const dh = j.channels.find((c: { id: string }) => c.id === 'DE-H');
    expect(dh.orders['1'].phase_deg).toBeCloseTo(130, 0);
    // ISO 20816-3, group 2, rigid: B/C 2.8, C/D 4.5 mm/s r.m.s.; 4.25 mm/s lies in zone C.
    expect(j.zone.machine).toBe('C');
    expect(j.zone.boundaries_mm_s).toEqual({ a_b: 1.4, b_c: 2.8, c_d: 4.5 });
    expect(de.zone).toBe('C');
    // One bearing only: a verdict from what exists, with the gap stated (never a confident one).
    expect(j.unbalance.kind).toBe('dynamic');
    expect(j.unbalance.confidence).toBe('low');
    expect(j.unbalance.limits.join(' ')).toMatch(/only one bearing/);
    expect(j.window.channels[0].stats.samples).toBe(12 * fs);
  });

  it('tells static unbalance from the phase relation of the two bearings', () => {
    // both bearings in phase, H 90 deg after V (common practice)
    const f = writeStaticRecord('static.wav');
    const c = join(dir, 'static.yaml');
    writeFileSync(c, cfgYaml({ tachChannel: 4 }) + NDE_SENSORS);
    const r = runCli(['analyze', f, '--config', c, '--json']);
    expect(r.code).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.unbalance.kind).toBe('static');
    expect(j.unbalance.evidence.join(' ')).toMatch(/DE.*NDE|bearing/i);
    const t = runCli(['analyze', f, '--config', c]);
    expect(t.stdout).toMatch(/unbalance: static/);
  });

  it('warns that tach.pulses_per_rev is probably wrong when the speed reads rated / 2, and claims no high confidence', () => {
    // A once-per-turn pickup (synthesized: one pulse per turn, 1485 r/min) configured with
    // pulses_per_rev: 2.
    const f = writeStaticRecord('one-pulse.wav');
    const wrong = join(dir, 'ppr2.yaml');
    writeFileSync(wrong, cfgYaml({ tachChannel: 4, ppr: 2 }) + NDE_SENSORS);
    const r = runCli(['analyze', f, '--config', wrong, '--json']);
    expect(r.code).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(j.speed_rpm).toBeCloseTo(742.5, 0); // what the wrong setting makes of 1485 r/min
    // the "1x" is the half order: near 0
    expect(j.channels[0].orders['1'].amp_pk_mm_s).toBeLessThan(0.1);
    expect(j.warnings[0]).toMatch(
      /743 r\/min is about 1\/2 of machine\.rated_rpm \(1485\).*tach\.pulses_per_rev is probably wrong.*set tach\.pulses_per_rev: 1/,
    );
    expect(j.unbalance.confidence).toBe('low');
    expect(j.unbalance.limits[0]).toMatch(/^confidence held low: .*pulses_per_rev/);
    const t = runCli(['analyze', f, '--config', wrong]);
    expect(t.stdout).toMatch(/unbalance: none \(confidence low\)/);
    expect(t.stdout).toMatch(
      /warnings:\n {2}- 743 r\/min is about 1\/2 of machine\.rated_rpm.*set tach\.pulses_per_rev: 1/,
    );
    // Control: the right setting on the same record, no such warning and a real 1x.
    const right = join(dir, 'ppr1.yaml');
    writeFileSync(right, cfgYaml({ tachChannel: 4 }) + NDE_SENSORS);
    const ok = JSON.parse(runCli(['analyze', f, '--config', right, '--json']).stdout);
    expect(ok.speed_rpm).toBeCloseTo(1485, 0);
    expect(ok.warnings.join(' ')).not.toMatch(/pulses_per_rev/);
    expect(ok.unbalance.limits.join(' ')).not.toMatch(/pulses_per_rev/);
    expect(ok.channels[0].orders['1'].amp_pk_mm_s).toBeCloseTo(6.0, 1);
  });

  it('prints a readable table with units by default', () => {
    const r = runCli(['analyze', rec, '--config', cfgFile]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/speed 1485\.0 r\/min/);
    expect(r.stdout).toMatch(/1x mm\/s pk/);
    expect(r.stdout).toMatch(/DE-V \(DE V\)\s+4\.\d\d\s+C\s+(5\.99|6\.0\d)\s+40\.\d/);
  });

  const bad: Array<[string, string, RegExp]> = [
    [
      'a sensor on a channel the recording lacks',
      cfgYaml({ sensorChannel: 5 }),
      /sensors\[0\]\.channel: sensor DE-V is on channel 5 but .*rec\.wav has 3 channel\(s\), numbered 0-2/,
    ],
    [
      'a tach channel the recording lacks',
      cfgYaml({ tachChannel: 7 }),
      /tach\.channel: the tach is on channel 7 but .* has 3 channel\(s\)/,
    ],
    [
      'a flat tach (the tach is pointed at a vibration channel)',
      cfgYaml({ tachChannel: 1, sensorChannel: 0 }).replace(
        'channel: 1, bearing: DE, direction: horizontal',
        'channel: 2, bearing: DE, direction: horizontal',
      ),
      /never reached the 2\.5 V trigger \(signal between/,
    ],
    [
      'a tach at an impossible speed',
      cfgYaml({ maxRpm: 1000 }),
      /tach pulses imply about 1485 r\/min, above tach\.max_rpm \(1000\)/,
    ],
  ];
  for (const [what, yaml, msg] of bad) {
    it(`gives one clear message for ${what}`, () => {
      const f = join(dir, `bad-${what.length}.yaml`);
      writeFileSync(f, yaml);
      const r = runCli(['analyze', rec, '--config', f]);
      expect(r.code).toBe(2);
      expect(r.stdout).toBe('');
      expectNoStack(r.stderr);
      expect(r.stderr).toMatch(msg);
    });
  }

  it('refuses a sample rate too low for the band', () => {
    const low = join(dir, 'low.wav');
    writeFloatWav(low, 2000, [
      new Float32Array(4000),
      new Float32Array(4000),
      new Float32Array(4000),
    ]);
    const r = runCli(['analyze', low, '--config', cfgFile]);
    expect(r.code).toBe(2);
    expectNoStack(r.stderr);
    expect(r.stderr).toMatch(
      /sample rate 2000 Hz is too low for the band up to 1000 Hz: it needs at least 2560 Hz/,
    );
  });

  it('explains usage mistakes', () => {
    const r = runCli(['analyze', rec]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/missing --config/);
    const r2 = runCli(['analyze', '--bogus']);
    expect(r2.code).toBe(2);
    expectNoStack(r2.stderr);
    expect(r2.stderr).toMatch(/usage: turnwise analyze/);
  });

  it('check-config reports problems and exits non-zero', () => {
    const f = join(dir, 'broken.yaml');
    writeFileSync(
      f,
      'machine: {id: "bad id", group: 2, support: rigid}\n' +
        'tach: {channel: 2, trigger_v: 2.5}\nsensors: []\n',
    );
    const r = runCli(['check-config', f]);
    expect(r.code).toBe(2);
    expectNoStack(r.stderr);
    expect(r.stderr).toMatch(/machine\.id: letters, digits/);
    expect(r.stderr).toMatch(/sensors: .*(at least|>=) ?1/i);
    expect(runCli(['check-config', 'config/example.yaml']).code).toBe(0);
  });
});
