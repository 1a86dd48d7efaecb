import { UserError } from '../../errors.js';
import {
  classifyZone,
  ISO_14694,
  iso14694Limits,
  iso20816Limits,
  type Limits,
  type Zone,
} from '../../watcher/limits.js';
import { numberOption, parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';

const usage = `turnwise zone --mm-s V (--group 1|2 | --fan-category BV-3|BV-4) --support rigid|flexible [--json]

  Classifies one broadband velocity reading (mm/s r.m.s., bearing housing, 10-1000 Hz; 2-1000 Hz
  below 600 r/min) against ISO 20816-3 (--group: 1 over 300 kW, 2 from 15 to 300 kW) or, for a fan,
  ISO 14694 (--fan-category, values from memory). --support rigid when the support's lowest natural
  frequency is at least 25 % above running speed, otherwise flexible. Prints each boundary with its
  source; the same tables drive the watcher's zones (agent/watcher/limits.ts).`;

/** What each zone means, in the words of ISO 20816-3 (paraphrased, common practice). */
const ISO_20816_MEANING: Readonly<Record<Zone, string>> = {
  A: 'typical of newly commissioned machines',
  B: 'acceptable for unrestricted long-term operation',
  C:
    'not acceptable for long-term continuous operation: ' +
    'run for a limited period until remedial action',
  D: 'severe enough to damage the machine',
};

/** ISO 14694 levels as mapped onto zones in agent/watcher/limits.ts. */
const ISO_14694_MEANING: Readonly<Record<Zone, string>> = {
  A: 'at or below the start-up (commissioning) limit',
  B: 'above start-up, at or below the alarm level',
  C: 'above alarm, at or below the shut-down level: find the cause',
  D: 'above the shut-down level',
};

export interface ZoneClassification {
  readonly value_mm_s: number;
  readonly standard: 'ISO 20816-3' | 'ISO 14694';
  readonly basis: string;
  readonly zone: Zone;
  readonly meaning: string;
  readonly boundaries: readonly {
    readonly name: string;
    readonly value_mm_s: number;
    readonly source: string;
  }[];
  readonly notes: readonly string[];
}

/** Pure: one reading against one limit set. */
export function classifyReading(valueMmS: number, limits: Limits): ZoneClassification {
  const iso14694 = limits.source === 'iso14694';
  const src = iso14694
    ? `${limits.basis}`
    : `${limits.basis} (zone boundary values as published in summaries of the standard)`;
  const zone = classifyZone(valueMmS, limits);
  const names = iso14694
    ? ['A/B (start-up)', 'B/C (alarm)', 'C/D (shut-down)']
    : ['A/B', 'B/C', 'C/D'];
  return {
    value_mm_s: valueMmS,
    standard: iso14694 ? 'ISO 14694' : 'ISO 20816-3',
    basis: limits.basis,
    zone,
    meaning: (iso14694 ? ISO_14694_MEANING : ISO_20816_MEANING)[zone],
    boundaries: [
      { name: names[0]!, value_mm_s: limits.ab_mm_s, source: src },
      { name: names[1]!, value_mm_s: limits.bc_mm_s, source: src },
      { name: names[2]!, value_mm_s: limits.cd_mm_s, source: src },
    ],
    notes: [
      'the reading must be broadband velocity r.m.s. on the bearing housing (not a ' +
        '1x peak, not displacement); a value on a boundary belongs to the zone below it',
      ...(iso14694
        ? []
        : [
            'ISO 20816-3 also calls a change of 25 % of ' +
              'the B/C value significant even inside a zone',
          ]),
      "a zone is guidance for people: the plant's own alarm and trip " +
        "settings, the fan maker's limits and local codes take precedence",
    ],
  };
}

export const zoneCommand: Command = {
  name: 'zone',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('zone', usage, argv, {
      'mm-s': { type: 'string' },
      group: { type: 'string' },
      support: { type: 'string' },
      'fan-category': { type: 'string' },
      json: { type: 'boolean' },
    });
    if (positionals.length)
      throw new UserError(
        'arguments',
        `unexpected argument "${positionals[0]}"`,
        `usage: ${usage}`,
      );
    const v = numberOption(
      'zone',
      usage,
      'mm-s',
      values['mm-s'],
      (x) => x >= 0 && x < 1000,
      'a velocity in mm/s r.m.s., 0 or more (e.g. --mm-s 4.2)',
    );
    if (v === undefined)
      throw new UserError(
        '--mm-s',
        'is required',
        'give the reading in mm/s r.m.s., e.g. --mm-s 4.2 (from in/s: multiply by 25.4)',
      );
    const support = values.support;
    if (support !== 'rigid' && support !== 'flexible') {
      throw new UserError(
        'turnwise zone --support',
        support === undefined ? 'is required' : `expected rigid or flexible, got "${support}"`,
        'rigid when the lowest natural frequency of machine and support is at ' +
          'least 25 % above running speed, otherwise flexible; if unsure, check both',
      );
    }
    const cat = values['fan-category'];
    if (cat !== undefined && values.group !== undefined)
      throw new UserError(
        'arguments',
        '--group and --fan-category both given',
        'give --group 1|2 for ISO 20816-3 or --fan-category for ISO 14694, not both',
      );
    let limits: Limits;
    if (cat !== undefined) {
      const key = cat.toUpperCase();
      if (!(key in ISO_14694))
        throw new UserError(
          '--fan-category',
          `expected one of ${Object.keys(ISO_14694).join(', ')}, got "${cat}"`,
          'ISO 14694 fan application categories (from memory): BV-3 for industrial ' +
            'process and power-generation fans, BV-4 for the most demanding duty',
        );
      limits = iso14694Limits(key as keyof typeof ISO_14694, support);
    } else {
      if (values.group !== '1' && values.group !== '2') {
        throw new UserError(
          'turnwise zone --group',
          values.group === undefined
            ? 'is required (or --fan-category)'
            : `expected 1 or 2, got "${values.group}"`,
          'ISO 20816-3 group 1: machines over 300 kW; group 2: 15 to 300 kW; ' +
            'for a fan rated by ISO 14694 give --fan-category BV-3|BV-4 instead',
        );
      }
      limits = iso20816Limits(Number(values.group) as 1 | 2, support);
    }
    const r = classifyReading(v, limits);
    if (values.json) {
      process.stdout.write(JSON.stringify(r, null, 2) + '\n');
      return 0;
    }
    const lines = [`${v.toFixed(2)} mm/s r.m.s. is in zone ${r.zone} of ${r.basis}: ${r.meaning}.`];
    for (const b of r.boundaries)
      lines.push(
        `  ${b.name.padEnd(16)} ${b.value_mm_s.toFixed(1).padStart(5)} mm/s r.m.s.  ` +
          `${v <= b.value_mm_s ? 'not passed' : 'passed'}   source: ${b.source}`,
      );
    for (const n of r.notes) lines.push(`  note: ${n}`);
    process.stdout.write(lines.join('\n') + '\n');
    return 0;
  },
};
