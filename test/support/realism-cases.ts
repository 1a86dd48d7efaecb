/**
 * The realism corpus: one PlantSpec per recording (see test/support/plant-recorder.ts for the
 * physics and docs/realism-corpus.md for what each recording is for).
 *
 * The fan is the invented Kessrow Board Mill fan ID-3A: a centre-hung induced-draft fan on a
 * 4-pole motor, 1485 r/min, bearings DE (0 mm) and NDE (1600 mm), impeller plane at 900 mm.
 * All numbers are invented for the tests; they are chosen to be plausible, not taken from a plant.
 *
 * Regenerate the files by hand (after `npm run build`):
 *   node dist/test/support/realism-cases.js OUT_DIR
 */
import { mkdirSync } from 'node:fs';
import { pathToFileURL } from 'node:url';
import {
  writeRecording,
  type BearingSpec,
  type PlantSpec,
  type SensorSpec,
} from './plant-recorder.js';

const DE: BearingSpec = {
  name: 'DE',
  position_mm: 0,
  // Housing modes: vertical stiffer than horizontal, both well above 1x (a rigid support in the
  // ISO 20816-3 sense: lowest natural frequency at least 25 % above running speed).
  vertical: { fn_hz: 58, zeta: 0.06, mass_kg: 180 },
  horizontal: { fn_hz: 44, zeta: 0.07, mass_kg: 180 },
};
const NDE: BearingSpec = {
  name: 'NDE',
  position_mm: 1600,
  vertical: { fn_hz: 62, zeta: 0.06, mass_kg: 160 },
  horizontal: { fn_hz: 47, zeta: 0.07, mass_kg: 160 },
};

function sensors(over: Partial<Record<string, Partial<SensorSpec>>> = {}): SensorSpec[] {
  const base: SensorSpec[] = [
    {
      id: 'DE-V',
      channel: 0,
      bearing: 'DE',
      direction: 'vertical',
      sensitivity_mv_per_g: 100,
      noise_g: 0.01,
      dc_v: 0.0021,
    },
    {
      id: 'DE-H',
      channel: 1,
      bearing: 'DE',
      direction: 'horizontal',
      sensitivity_mv_per_g: 100,
      noise_g: 0.01,
      dc_v: -0.0013,
    },
    {
      id: 'NDE-V',
      channel: 2,
      bearing: 'NDE',
      direction: 'vertical',
      sensitivity_mv_per_g: 100,
      noise_g: 0.01,
      dc_v: 0.0008,
    },
    {
      id: 'NDE-H',
      channel: 3,
      bearing: 'NDE',
      direction: 'horizontal',
      sensitivity_mv_per_g: 100,
      noise_g: 0.01,
      dc_v: -0.0017,
    },
  ];
  return base.map((s) => ({ ...s, ...(over[s.id] ?? {}) }) as SensorSpec);
}

/**
 * A static unbalance of `gramMm` g mm at the impeller plane (900 mm), 70 deg from the mark against
 * rotation.
 */
function fan(
  name: string,
  gramMm: number,
  extra: Partial<PlantSpec> = {},
  planeMm = 900,
): PlantSpec {
  return {
    name,
    sample_rate_hz: 25600,
    seconds: 12,
    speed: { rpm: 1485 },
    bearings: [DE, NDE],
    unbalance: [{ grams: gramMm / 450, radius_mm: 450, angle_deg: 70, plane_mm: planeMm }],
    vertical_axis_deg: 35,
    tach: { channel: 4, high_v: 4, pulse_deg: 12, rise_us: 60 },
    board: { range_v: 5, bits: 24 },
    sensors: sensors(),
    machine: { group: 2, support: 'rigid', rated_rpm: 1485 },
    seed: 10,
    ...extra,
  };
}

export const REFERENCE = fan('reference-static', 27000);

export const CORPUS: Record<string, PlantSpec> = {
  'reference-static': REFERENCE,
  // (a) zone A, residual unbalance with an in-phase bearing pattern, overall about 0.65 mm/s.
  'zone-a-residual': fan('zone-a-residual', 4400, { seed: 11 }),
  // (a') the same fan a little less well balanced: 1x about 1 mm/s r.m.s., still zone A.
  'zone-a-residual-1mm': fan('zone-a-residual-1mm', 6800, { seed: 12 }),
  // (b) a loose connector on DE-H: impulses of 3-9 V, about 40 a second, clipped at the +/-5 V
  // rail. A larger fan (group 1, over 300 kW) whose impeller sits nearer DE and whose DE housing is
  // stiffer horizontally; DE-H's true overall is about 4.7 mm/s.
  'loose-connector': fan(
    'loose-connector',
    38000,
    {
      seed: 13,
      machine: { group: 1, support: 'rigid', rated_rpm: 1485 },
      bearings: [{ ...DE, horizontal: { fn_hz: 50, zeta: 0.07, mass_kg: 180 } }, NDE],
      sensors: sensors({
        'DE-H': {
          connector: { rate_per_s: 40, min_v: 3, max_v: 9, decay_ms: 0.05, ring_hz: 3000 },
        },
      }),
    },
    600,
  ),
  'neighbour-beat': fan('neighbour-beat', 27000, {
    seed: 14,
    neighbour_ratio: 1.003,
    sensors: sensors({
      'DE-V': { neighbour: { vel_pk_mm_s: 1.2, phase_deg: 20 } },
      'DE-H': { neighbour: { vel_pk_mm_s: 0.8, phase_deg: 115 } },
      'NDE-V': { neighbour: { vel_pk_mm_s: 1.0, phase_deg: 200 } },
      'NDE-H': { neighbour: { vel_pk_mm_s: 0.7, phase_deg: 290 } },
    }),
  }),
  'vsd-ramp': fan('vsd-ramp', 30000, {
    seed: 15,
    speed: { rpm: 1350, ramp: { from_s: 3, to_s: 9, to_rpm: 1485 } },
  }),
  'tach-jitter': fan('tach-jitter', 27000, {
    seed: 16,
    speed: { rpm: 1485, jitter_per_rev: 0.002 },
  }),
  'opposite-side-configured': fan('opposite-side-configured', 27000, {
    seed: 17,
    sensors: sensors({ 'NDE-H': { opposite_side: true, config_mounting_angle_deg: 180 } }),
  }),
  'opposite-side-unconfigured': fan('opposite-side-unconfigured', 27000, {
    seed: 17,
    sensors: sensors({ 'NDE-H': { opposite_side: true } }),
  }),
  'mains-hum': fan('mains-hum', 27000, {
    seed: 18,
    sensors: sensors(
      Object.fromEntries(
        ['DE-V', 'DE-H', 'NDE-V', 'NDE-H'].map((id, i) => [
          id,
          { mains: { v50_pk: 0.003 - 0.0004 * i, v100_pk: 0.0012, freq_hz: 50 } },
        ]),
      ),
    ),
  }),
  'bearing-defect': fan('bearing-defect', 27000, {
    seed: 19,
    // Invented bearing: 8 balls of 28.6 mm on a 125 mm pitch circle, contact angle 0: outer-race
    // pass order = 8/2 x (1 - 28.6/125) = 3.08 (own computation, textbook formula).
    impacts: {
      bearing: 'NDE',
      order: 3.085,
      slip_share: 0.01,
      resonance_hz: 3200,
      zeta: 0.04,
      ring_peak_g: 4,
      pulse_ms: 0.2,
    },
    sensors: sensors({ 'NDE-V': { impact_share: 1 }, 'NDE-H': { impact_share: 0.45 } }),
  }),
};

/** Writes every recording of the corpus (WAV + YAML) into `dir`. */
export function writeCorpus(
  dir: string,
  stateDir: string,
): Record<string, { wav: string; yaml: string }> {
  mkdirSync(dir, { recursive: true });
  return Object.fromEntries(
    Object.entries(CORPUS).map(([k, spec]) => [k, writeRecording(spec, dir, stateDir)]),
  );
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const dir = process.argv[2];
  if (!dir) {
    process.stderr.write('usage: node dist/test/support/realism-cases.js OUT_DIR\n');
    process.exit(2);
  }
  const out = writeCorpus(dir, `${dir}/state`);
  for (const [k, f] of Object.entries(out)) process.stdout.write(`${k}: ${f.wav} ${f.yaml}\n`);
}
