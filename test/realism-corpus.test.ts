import { afterAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { runCli } from './support/cli.js';
import {
  ampOf,
  expectedOneX,
  expectedOverall,
  lagOf,
  markTimes,
  writeRecording,
  type PlantSpec,
} from './support/plant-recorder.js';
import { CORPUS } from './support/realism-cases.js';

/**
 * The realism corpus through the real product path: each recording of test/support/realism-cases.ts
 * is written as a WAV file plus a config by the plant recorder (its own physics, separate from the
 * simulator and from synth.ts), then `turnwise analyze REC.wav --config CFG.yaml --json` runs as a
 * real process on the compiled CLI (build first: `npm run build`).
 *
 * Every expected value states its basis:
 * - 1x amplitude and phase, overall r.m.s.: own computation from the recorder's parameters
 *   (unbalance force m r w^2 through each housing's 2nd-order receptance; neighbour leakage into
 *   the synchronous average as a closed-form Fourier coefficient per revolution; noise, mains and
 *   impact band powers in closed form). Never from running the product.
 * - zone: ISO 20816-3 boundaries (table below) applied to the expected overall of the sensors that
 *   are OK; a sensor that is not OK takes no part (machinery-protection practice, API 670 from
 *   memory).
 * - verdict: the unbalance rules of the trade (common practice): 1x dominant, H and V about 90 deg
 *   apart, both bearings in phase -> static; neither in phase nor opposed -> dynamic; residual 1x
 *   in zone A is not a finding.
 */

/**
 * ISO 20816-3, broadband velocity r.m.s. 10-1000 Hz on bearing housings, zone boundaries A/B, B/C,
 * C/D in mm/s (values confirmed in public summaries of the standard; the 2022 edition is believed
 * to
 * keep them: from memory).
 */
const ISO_20816_3: Record<
  1 | 2,
  Record<'rigid' | 'flexible', readonly [number, number, number]>
> = {
  1: { rigid: [2.3, 4.5, 7.1], flexible: [3.5, 7.1, 11.0] },
  2: { rigid: [1.4, 2.8, 4.5], flexible: [2.3, 4.5, 7.1] },
};

type Zone = 'A' | 'B' | 'C' | 'D';
function zoneOf(v: number, b: readonly [number, number, number]): Zone {
  return v <= b[0] ? 'A' : v <= b[1] ? 'B' : v <= b[2] ? 'C' : 'D';
}
const worse = (a: Zone, b: Zone): Zone => (a > b ? a : b);

interface Case {
  readonly recording: string;
  /** What is imperfect about the recording. */
  readonly imperfection: string;
  readonly kind: 'static' | 'couple' | 'dynamic' | 'overhung' | 'none';
  readonly kindBasis: string;
  readonly zone: Zone;
  /** Sensors expected not OK (sensor fault). */
  readonly notOk?: readonly string[];
  /** Tolerances: 1x amplitude share (+ 0.01 mm/s), phase degrees, overall share (+ 0.01 mm/s). */
  readonly tol?: { readonly amp?: number; readonly phaseDeg?: number; readonly overall?: number };
  readonly extra?: (j: AnalyzeJson, spec: PlantSpec) => void;
}

interface ChannelJson {
  id: string;
  mounting_angle_deg: number;
  overall_rms_mm_s: number;
  zone: Zone | null;
  sensor_ok: boolean | null;
  orders: Record<string, { amp_pk_mm_s: number; phase_deg: number }>;
}
interface AnalyzeJson {
  speed_rpm: number;
  revolutions: number;
  revolutions_rejected: number;
  zone: { machine: string };
  unbalance: { kind: string; confidence: string };
  channels: ChannelJson[];
}

const STATIC =
  'common practice: 1x dominant, H and V about 90 deg apart with a ratio ' +
  'below 3, both bearings in phase in both directions -> static unbalance';

const CASES: readonly Case[] = [
  {
    recording: 'reference-static',
    imperfection:
      'none beyond broadband noise, DC offsets, 24-bit steps and a tach with a 60 us rise',
    kind: 'static',
    kindBasis: STATIC,
    zone: 'C',
  },
  {
    recording: 'zone-a-residual',
    imperfection:
      'case (a): zone A fan, overall about 0.65 mm/s, residual 1x with an in-phase bearing pattern',
    kind: 'none',
    kindBasis:
      'residual unbalance in zone A is not a finding (ISO 20816-3: zone A is the condition ' +
      'of newly commissioned machines; common practice: no balancing is called for there)',
    zone: 'A',
  },
  {
    recording: 'zone-a-residual-1mm',
    imperfection:
      'case (a), a little less well balanced: 1x about 1.0 mm/s ' +
      'r.m.s., above the default 0.7 mm/s judging floor, still zone A',
    kind: 'none',
    kindBasis:
      'residual unbalance in zone A is not a finding (ISO 20816-3 zone A; common practice)',
    zone: 'A',
  },
  {
    recording: 'loose-connector',
    imperfection:
      'case (b): DE-H connector intermittent, 3-9 V ringing pulses about 40 a ' +
      'second clipped at the +/-5 V input range, no full_scale_v in the config',
    kind: 'static',
    kindBasis: `${STATIC} (from the three healthy sensors: the vertical pair is in phase)`,
    // Group 1 rigid; from the OK sensors: DE-V 3.2 (B), NDE-V 1.9 (A), NDE-H 3.7 (B). DE-H's true
    // 4.7 mm/s (zone C) cannot be known from a faulty channel: it is reported not OK instead.
    zone: 'B',
    notOk: ['DE-H'],
  },
  {
    recording: 'neighbour-beat',
    imperfection:
      'a neighbouring fan at 1.003 x our speed reaches every sensor (0.7-1.2 mm/s ' +
      'pk), beating with our 1x (beat period 13.5 s, longer than the 12 s record)',
    kind: 'static',
    kindBasis: STATIC,
    zone: 'C',
    // The overall of a beat that does not complete in the record depends on how the window weighs
    // its
    // start and end: 3 % (own computation: the spectrum's Hann-windowed segments vs the plain mean
    // square).
    tol: { overall: 0.03 },
  },
  {
    recording: 'vsd-ramp',
    imperfection:
      'the variable-speed drive ramps 1350 -> 1485 r/min ' +
      '(10 %) between 3 s and 9 s of the 12 s record',
    kind: 'static',
    kindBasis: STATIC,
    zone: 'C',
    // Velocity-domain average vs acceleration-domain average of the ramp differ by about 0.7 % (own
    // computation).
    tol: { amp: 0.02, phaseDeg: 1.5 },
    extra: (j, spec) => {
      // Speed = mean revolution period over the record (own computation from the mark times).
      const m = markTimes(spec);
      const mean = (m[m.length - 1]! - m[2]!) / (m.length - 3);
      expect(j.speed_rpm).toBeCloseTo(60 / mean, 0);
    },
  },
  {
    recording: 'tach-jitter',
    imperfection:
      'shaft speed differs by 0.2 % r.m.s. from revolution to ' +
      'revolution (the tach pulses follow the integrated speed)',
    kind: 'static',
    kindBasis: STATIC,
    zone: 'C',
  },
  {
    recording: 'opposite-side-configured',
    imperfection:
      'NDE-H mounted on the opposite side of the housing (axis ' +
      'turned 180 deg), mounting_angle_deg: 180 in the config',
    kind: 'static',
    kindBasis:
      `${STATIC}; the 180 deg is subtracted before the comparison (common practice: ` +
      `readings are compared only after each sensor's mounting angle is known)`,
    zone: 'C',
  },
  {
    recording: 'opposite-side-unconfigured',
    imperfection: 'NDE-H mounted on the opposite side, the config does not say so',
    kind: 'dynamic',
    kindBasis:
      'common practice applied to what the sensors show: vertical pair in ' +
      'phase, horizontal pair opposed (the unknown 180 deg) -> neither ' +
      'static nor couple -> dynamic, and not a confident verdict',
    zone: 'C',
    extra: (j) => expect(j.unbalance.confidence).not.toBe('high'),
  },
  {
    recording: 'mains-hum',
    imperfection:
      '50 Hz (1.8-3 mV pk) and 100 Hz (1.2 mV pk) ground-loop ' +
      'pickup on every sensor cable; 50 Hz sits 0.5 Hz from 2x',
    kind: 'static',
    kindBasis: STATIC,
    // The broadband overall counts the hum as vibration (ISO 20816-3 overall is everything in
    // 10-1000 Hz): included in the expected overall.
    zone: 'C',
  },
  {
    recording: 'bearing-defect',
    imperfection:
      'outer-race defect on NDE: impacts at 3.085 x (1 % slip) ringing ' +
      'a 3.2 kHz housing resonance, about 3.3 g (0.33 V) peaks on NDE-V',
    kind: 'static',
    kindBasis:
      `${STATIC}; the impacts are a machine fault above the band, not ` +
      `a sensor fault (their peaks stay far below the input range)`,
    zone: 'C',
  },
];

const dir = mkdtempSync(join(tmpdir(), 'tw-realism-'));
// About 6 MB per recording: leave nothing behind.
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const circDiff = (a: number, b: number): number => Math.abs(((a - b + 540) % 360) - 180);

describe('realism corpus through turnwise analyze (own recorder physics, real CLI process)', () => {
  for (const c of CASES) {
    it(
      `${c.recording}: ${c.imperfection} -> ${c.kind}, zone ${c.zone}`,
      { timeout: 120_000 },
      () => {
        const spec = CORPUS[c.recording]!;
        const { wav, yaml } = writeRecording(spec, dir, join(dir, 'state'));
        const r = runCli(['analyze', wav, '--config', yaml, '--json']);
        expect(r.code, r.stderr).toBe(0);
        const j = JSON.parse(r.stdout) as AnalyzeJson;
        const bounds = ISO_20816_3[spec.machine.group][spec.machine.support];
        const notOk = new Set(c.notOk ?? []);

        // The expectation's own consistency: the stated machine zone is the worst zone of the
        // expected overalls of the OK sensors, and no expected overall sits within 3 % of a
        // boundary (so the zone checks below cannot pass or fail on rounding).
        let computed: Zone | null = null;
        const expected = new Map<
          string,
          { overall: number; oneX: ReturnType<typeof expectedOneX> }
        >();
        for (const s of spec.sensors) {
          const overall = expectedOverall(spec, s);
          expected.set(s.id, { overall, oneX: expectedOneX(spec, s) });
          if (notOk.has(s.id)) continue;
          for (const b of bounds)
            expect(
              Math.abs(overall / b - 1),
              `${s.id}: expected overall ${overall.toFixed(3)} too close to the ${b} mm/s boundary`,
            ).toBeGreaterThan(0.03);
          computed = computed ? worse(computed, zoneOf(overall, bounds)) : zoneOf(overall, bounds);
        }
        expect(computed).toBe(c.zone);

        // Tach: every mark passage but the first two is a trusted revolution (own computation; the
        // product confirms the reference interval first), none rejected.
        const marks = markTimes(spec).length;
        expect(j.revolutions).toBeGreaterThanOrEqual(marks - 3);
        expect(j.revolutions).toBeLessThanOrEqual(marks - 1);
        expect(j.revolutions_rejected).toBe(0);

        expect.soft(j.unbalance.kind, c.kindBasis).toBe(c.kind);
        expect.soft(j.zone.machine, 'ISO 20816-3 zone of the OK sensors').toBe(c.zone);
        const tAmp = c.tol?.amp ?? 0.015;
        const tPh = c.tol?.phaseDeg ?? 1.0;
        const tOv = c.tol?.overall ?? 0.015;
        for (const s of spec.sensors) {
          const ch = j.channels.find((x) => x.id === s.id)!;
          const e = expected.get(s.id)!;
          if (notOk.has(s.id)) {
            expect.soft(ch.sensor_ok, `${s.id} has a sensor fault: not OK`).toBe(false);
            expect.soft(ch.zone, `${s.id} not OK: no zone`).toBeNull();
            continue;
          }
          expect.soft(ch.sensor_ok, `${s.id} is healthy`).toBe(true);
          expect
            .soft(ch.zone, `${s.id} zone of ${e.overall.toFixed(3)} mm/s (ISO 20816-3)`)
            .toBe(zoneOf(e.overall, bounds));
          expect
            .soft(
              Math.abs(ch.overall_rms_mm_s - e.overall),
              `${s.id} overall ${ch.overall_rms_mm_s} vs ` +
                `${e.overall.toFixed(3)} mm/s (own computation)`,
            )
            .toBeLessThanOrEqual(tOv * e.overall + 0.01);
          const one = ch.orders['1']!;
          const amp = ampOf(e.oneX);
          const lag = lagOf(e.oneX);
          expect
            .soft(
              Math.abs(one.amp_pk_mm_s - amp),
              `${s.id} 1x ${one.amp_pk_mm_s} vs ${amp.toFixed(3)} mm/s pk (own computation)`,
            )
            .toBeLessThanOrEqual(tAmp * amp + 0.01);
          expect
            .soft(
              circDiff(one.phase_deg, lag),
              `${s.id} 1x phase ${one.phase_deg} vs ${lag.toFixed(1)} deg (own computation)`,
            )
            .toBeLessThanOrEqual(tPh);
        }
        c.extra?.(j, spec);
      },
    );
  }

  it(
    'reads the opposite-side sensor 180 deg from where the housing moves, whatever the config says (own computation)',
    { timeout: 120_000 },
    () => {
      // The raw phase is reported as measured; mounting_angle_deg only enters the comparisons.
      const spec = CORPUS['opposite-side-configured']!;
      const ref = CORPUS['reference-static']!;
      const e = lagOf(expectedOneX(spec, spec.sensors[3]!));
      const eRef = lagOf(expectedOneX(ref, ref.sensors[3]!));
      expect(circDiff(e, eRef)).toBeCloseTo(180, 6);
      const { wav, yaml } = writeRecording(spec, dir, join(dir, 'state'));
      const j = JSON.parse(
        runCli(['analyze', wav, '--config', yaml, '--json']).stdout,
      ) as AnalyzeJson;
      const nh = j.channels.find((x) => x.id === 'NDE-H')!;
      expect(nh.mounting_angle_deg).toBe(180);
      expect(circDiff(nh.orders['1']!.phase_deg, e)).toBeLessThanOrEqual(1.0);
    },
  );
});
