// Writes docs/configuration.md, the configuration reference, from config/turnwise.schema.json (the
// zod schema of agent/config/*.ts as JSON Schema). `npm run schema` runs it after writing the
// schema; test/docs-links.test.ts fails when the committed page differs from what this produces.
import { readFileSync, writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

export const CONFIG_DOC_PATH = 'docs/configuration.md';

/** Keys whose schema gives no description: what they mean (kept here, beside the basis labels). */
const EXTRA_TEXT = {
  'tach.pulses_per_rev':
    'Pulses per turn of the tach pickup (equally spaced; with ' +
    'more than one, phase is consistent within a run only).',
  'sensors[].id': 'Sensor id, used in events, topics and the live page (e.g. DE-V).',
  'sensors[].direction': 'Measuring direction of the sensor.',
  'watcher.trend.min_points': 'History points needed before a trend is stated.',
  'watcher.baseline.speed_rpm': 'Speed the hand-set baseline was measured at, r/min.',
  'advisory.ack_button.debounce_ms': 'Debounce time of the acknowledge button, ms.',
  'sensors[].bias_v.min': 'Lowest healthy DC bias, volts (below it: a shorted sensor or cable).',
  'sensors[].bias_v.max':
    'Highest healthy DC bias, volts (above it: an open cable, near the supply).',
  'dsp.band_hz.low': 'Lower band edge, Hz.',
  'dsp.band_hz.high': 'Upper band edge, Hz; the sample rate must be at least 2.56 x this.',
  'mqtt.username': 'Broker user name.',
  'mqtt.password': 'Broker password: exactly one of file or env, never the password itself.',
  'mqtt.tls': 'TLS settings for an mqtts:// URL; every key optional.',
  'mqtt.keepalive_s': 'MQTT keep-alive interval, s.',
  'mqtt.commands.token': 'The command token: exactly one of file or env.',
  'watcher.limits': 'Where the zone boundaries come from: source iso20816, iso14694 or custom.',
  'watcher.unbalance': 'Thresholds of the unbalance-signature rules (the rules: common practice).',
  'watcher.sensor_health': 'When a sensor or the tach counts as not OK.',
  'watcher.history': 'The 1x and overall history under state_dir.',
  'watcher.trend': 'The Theil-Sen trend over the history.',
  'live.capture': 'How a balancing run is captured from the live 1x vectors.',
};

/** Introductions of the sections whose schema has no description. */
const SECTION_TEXT = {
  machine: 'The machine being watched.',
  tach: 'The once-per-turn reference on an acquisition channel.',
  sensors: 'One entry per accelerometer.',
  dsp: 'The measurement core.',
  balance:
    'Defaults for balancing jobs on this machine; a ' +
    "job file's own values win over these. Optional.",
  watcher:
    'Severity limits, alarm timing, unbalance-signature thresholds, ' +
    'sensor health, history and trend. Every key is defaulted.',
  logging: 'Log lines on stdout (the journal under systemd).',
};

/**
 * Basis of a default where the description does not say it. Anything not listed and not labelled
 * in its description is the project's own choice.
 */
const BASIS = {
  'dsp.band_hz': 'ISO 20816-3',
  'sensors[].bias_v': 'common practice',
  'watcher.limits': 'ISO 20816-3',
  'watcher.baseline_alarm': 'ISO 20816-3',
  'watcher.vector_change_mm_s': 'ISO 20816-3 (a change of 25 % of B/C is significant)',
  'watcher.on_delay_s': 'API 670 (from memory): delays of about 1-3 s',
  'watcher.startup_multiplier': 'API 670 (from memory): 2 or 3',
  'watcher.unbalance.hv_ratio_max': 'common practice',
  'watcher.unbalance.phase_tolerance_deg': 'common practice',
  'watcher.unbalance.one_x_share_min': "project's choice (the rule: common practice)",
  'watcher.unbalance.two_x_ratio_max': "project's choice (the rule: common practice)",
  'watcher.unbalance.axial_ratio_high': "project's choice (the rule: common practice)",
  'watcher.unbalance.phase_stability_deg': "project's choice (the rule: common practice)",
  'advisory.min_channels': 'API 670 (from memory): two channels at a bearing agree',
  'advisory.hold_s': 'API 670 (from memory): delays of about 1-3 s',
  'advisory.zone': "ISO 20816-3 zones; D by the project's choice",
  'balance.bearings': 'common practice (trial weight for 10 % of the load on one bearing)',
  'acquisition.pcm_full_scale_v': 'common practice (the usual +/-10 V input range)',
};

const UNIT_SUFFIXES = [
  ['_mv_per_g', 'mV/g'],
  ['_mm_s', 'mm/s'],
  ['_rpm', 'r/min'],
  ['_deg', 'degrees'],
  ['_hz', 'Hz'],
  ['_ms', 'ms'],
  ['_s', 's'],
  ['_mm', 'mm'],
  ['_kg', 'kg'],
  ['_mb', 'MiB'],
  ['_pct', '%'],
  ['_share', 'fraction'],
  ['_v', 'V'],
  ['_g', 'g'],
];

function unitOf(key) {
  for (const [suffix, unit] of UNIT_SUFFIXES) if (key.endsWith(suffix)) return unit;
  if (key === 'baud') return 'bit/s';
  return '';
}

function typeOf(n) {
  if (n.const !== undefined) return `\`${JSON.stringify(n.const)}\``;
  if (n.enum) return n.enum.map((v) => `\`${v}\``).join(' | ');
  if (n.oneOf || n.anyOf) return 'one of the forms below';
  if (n.prefixItems)
    return `list of ${n.prefixItems.length} ${n.prefixItems.map((i) => i.type).join(', ')}`;
  let t = n.type ?? 'any';
  if (t === 'array') t = `list of ${n.items ? typeOf(n.items) : 'any'}`;
  if (
    t === 'object' &&
    n.additionalProperties &&
    typeof n.additionalProperties === 'object' &&
    !n.properties
  )
    t = `map of ${typeOf(n.additionalProperties)}`;
  const r = [];
  if (n.minimum !== undefined) r.push(`>= ${n.minimum}`);
  if (n.exclusiveMinimum !== undefined) r.push(`> ${n.exclusiveMinimum}`);
  if (n.maximum !== undefined) r.push(`<= ${n.maximum}`);
  if (n.exclusiveMaximum !== undefined) r.push(`< ${n.exclusiveMaximum}`);
  if (n.minItems !== undefined) r.push(`at least ${n.minItems}`);
  if (n.maxItems !== undefined) r.push(`at most ${n.maxItems}`);
  return r.length ? `${t} (${r.join(', ')})` : t;
}

function basisOf(path, n) {
  if (BASIS[path]) return BASIS[path];
  const d = n.description ?? '';
  const labels = [];
  for (const [re, label] of [
    [/ISO 20816-3/, 'ISO 20816-3'],
    [/ISO 14694/, 'ISO 14694 (from memory)'],
    [/ISO 21940-11/, 'ISO 21940-11'],
    [/API 670/, 'API 670 (from memory)'],
    [/common practice/, 'common practice'],
  ])
    if (re.test(d)) labels.push(label);
  if (labels.length) return labels.join('; ');
  if (n.default === undefined) return '';
  return "project's choice";
}

const esc = (s) => String(s).replace(/\|/g, '\\|').replace(/\n/g, ' ');

function rows(node, prefix, required, out) {
  for (const [key, n] of Object.entries(node.properties ?? {})) {
    const path = prefix ? `${prefix}.${key}` : key;
    const req = required.includes(key);
    const text = n.description ?? EXTRA_TEXT[path] ?? '';
    const section = n.type === 'object' && n.properties;
    const def =
      section && n.default !== undefined
        ? "(its keys' defaults)"
        : n.default !== undefined
          ? `\`${JSON.stringify(n.default)}\``
          : req
            ? '(required)'
            : '(none)';
    const basis = section ? (BASIS[path] ?? '') : basisOf(path, n);
    out.push(
      `| \`${path}\` | ${esc(typeOf(n))} | ${def} | ${unitOf(key)} | ` +
        `${esc(basis)} | ${esc(section && !prefix ? '' : text)} |`,
    );
    if (n.type === 'object' && n.properties) rows(n, path, n.required ?? [], out);
    if (n.type === 'array' && n.items?.properties)
      rows(n.items, `${path}[]`, n.items.required ?? [], out);
    if (n.type === 'object' && !n.properties && n.additionalProperties?.properties) {
      rows(n.additionalProperties, `${path}.<name>`, n.additionalProperties.required ?? [], out);
    }
    for (const v of n.oneOf ?? n.anyOf ?? []) {
      if (!v.properties) continue;
      const tag = Object.entries(v.properties).find(([, p]) => p.const !== undefined);
      out.push(
        `| *${path} with ${tag ? `${tag[0]}: ${tag[1].const}` : 'this form'}* | ` +
          `| | | | ${esc(v.description ?? '')} |`,
      );
      rows(
        {
          properties: Object.fromEntries(
            Object.entries(v.properties).filter(([k]) => !tag || k !== tag[0]),
          ),
        },
        path,
        v.required ?? [],
        out,
      );
    }
  }
}

const HEAD =
  '| key | type | default | unit | basis | meaning |\n| --- | --- | --- | --- | --- | --- |';

/** The whole page, from the JSON Schema object. */
export function configReference(schema) {
  const parts = [
    '# Configuration reference',
    '',
    '<!-- Generated by scripts/config-doc.mjs from ' +
      'config/turnwise.schema.json (`npm run schema`); do not edit by hand. -->',
    '',
    'One YAML file, validated against one schema at load (`agent/config/`, one file per section);',
    '`config/turnwise.schema.json` is the same schema ' +
      'as JSON Schema for editors (regenerate it and this',
    'page with `npm run schema`; a test fails when either ' +
      'is stale). Every error names the path, what was',
    'expected and what was found. `turnwise check-config ' +
      'FILE` validates a file. `units: mm/s` (default) or',
    '`in/s` sets the units of tables and the live page; ' +
      'JSON always uses the units in its field names.',
    "`config/example.yaml` (the invented demo fan) shows the measurement core's keys,",
    "`config/example-network.yaml` the plant network's. " +
      'Each driver accepts only its own `acquisition` keys.',
    '',
    '"Basis" says where a default (or, for a key without one, its meaning) comes from: a published',
    'standard, "common practice" (a rule of the trade ' +
      'with no single source), "from memory" (check it',
    'against the current edition before relying on ' +
      'it), or "project\'s choice". "(none)": the key is',
    'optional and has no fixed default; its meaning says what applies without it.',
    '',
  ];
  const top = schema.properties;
  const required = schema.required ?? [];
  const scalars = Object.entries(top).filter(
    ([, n]) => n.type !== 'object' && !n.oneOf && !n.anyOf && n.type !== 'array',
  );
  parts.push('## Top level', '', HEAD);
  const out = [];
  rows({ properties: Object.fromEntries(scalars) }, '', required, out);
  parts.push(...out, '');
  for (const [key, n] of Object.entries(top)) {
    if (scalars.some(([k]) => k === key)) continue;
    const o = [];
    rows({ properties: { [key]: n } }, '', required, o);
    const intro = n.description ?? SECTION_TEXT[key];
    parts.push(`## ${key}`, '', ...(intro ? [esc(intro), ''] : []), HEAD, ...o, '');
  }
  return parts.join('\n');
}

if (process.argv[1] === fileURLToPath(import.meta.url)) {
  const root = new URL('../', import.meta.url);
  const schema = JSON.parse(readFileSync(new URL('config/turnwise.schema.json', root), 'utf8'));
  writeFileSync(new URL(CONFIG_DOC_PATH, root), configReference(schema));
  console.log(`wrote ${CONFIG_DOC_PATH}`);
}
