import { existsSync, mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { loadConfig } from '../../config/load.js';
import { UserError } from '../../errors.js';
import { decodeRecord } from '../../outbox/record.js';
import { QUARANTINE_DIR } from '../../quarantine.js';
import { renderPayloadSchemas } from '../../mqtt/payloads.js';
import { outboxSettings } from '../../mqtt/settings.js';
import { topicsFor } from '../../mqtt/topics.js';
import { parseCommandArgs } from '../args.js';
import type { Command } from '../command.js';

const usage = [
  'turnwise mqtt topics --config CFG [--json]      topic layout for this config',
  '       turnwise mqtt outbox --config CFG [--json]      ' +
    'events waiting in the outbox, and quarantined files',
  '       turnwise mqtt schemas --out DIR [--check]       ' +
    'write (or check) the JSON Schema of every MQTT payload',
].join('\n');

function schemasAction(out: string | undefined, check: boolean): number {
  if (!out) throw new UserError('command line', 'schemas needs --out DIR', `usage: ${usage}`);
  const files = renderPayloadSchemas();
  if (check) {
    const stale = [...files]
      .filter(
        ([name, text]) =>
          !existsSync(join(out, name)) || readFileSync(join(out, name), 'utf8') !== text,
      )
      .map(([n]) => n);
    if (stale.length) {
      process.stderr.write(
        `${out}: out of date: ${stale.join(', ')}\n` +
          `  -> run \`turnwise mqtt schemas --out ${out}\` and commit the result\n`,
      );
      return 1;
    }
    process.stdout.write(`${out}: ${files.size} schema files up to date\n`);
    return 0;
  }
  mkdirSync(out, { recursive: true });
  for (const [name, text] of files) writeFileSync(join(out, name), text);
  process.stderr.write(`wrote ${files.size} schema files to ${out}\n`);
  return 0;
}

function outboxAction(cfgFile: string, json: boolean): number {
  const cfg = loadConfig(cfgFile);
  if (!cfg.mqtt)
    throw new UserError(
      cfgFile,
      'has no mqtt section, so there is no outbox',
      'add an mqtt section (see docs/plant-network.md, "Config", and config/example-network.yaml)',
    );
  const { dir } = outboxSettings(cfg.mqtt, cfg.state_dir);
  const names = existsSync(dir) ? readdirSync(dir).sort() : [];
  const pending = names
    .filter((n) => /^\d{16}\.rec$/.test(n))
    .map((n) => {
      const rec = decodeRecord(readFileSync(join(dir, n)));
      return 'problem' in rec
        ? { file: n, problem: rec.problem }
        : {
            file: n,
            id: rec.id,
            type: rec.type,
            severity: rec.severity,
            ts: (JSON.parse(rec.json) as { ts?: string }).ts ?? null,
          };
    });
  const qdir = join(dir, QUARANTINE_DIR);
  const quarantined = existsSync(qdir) ? readdirSync(qdir).sort() : [];
  if (json) {
    process.stdout.write(JSON.stringify({ dir, pending, quarantined }, null, 2) + '\n');
    return 0;
  }
  process.stdout.write(
    `${dir}: ${pending.length} event(s) waiting, ${quarantined.length} quarantined file(s)\n`,
  );
  for (const p of pending) {
    process.stdout.write(
      'problem' in p
        ? `  ${p.file}  DAMAGED: ${p.problem}\n`
        : `  ${p.file}  ${p.severity.padEnd(7)}  ${p.type}  ${p.ts ?? ''}  id ${p.id}\n`,
    );
  }
  for (const q of quarantined) process.stdout.write(`  quarantine/${q}\n`);
  return 0;
}

function topicsAction(cfgFile: string, json: boolean): number {
  const cfg = loadConfig(cfgFile);
  if (!cfg.mqtt)
    throw new UserError(
      cfgFile,
      'has no mqtt section',
      'add an mqtt section with url and topic_prefix',
    );
  const t = topicsFor(cfg.mqtt.topic_prefix, cfg.machine.id);
  const rows: Array<[string, string, string]> = [
    [t.status, 'retained, QoS 1', 'online/offline status; offline last-will'],
    [t.heartbeat, 'QoS 0', `health counters every ${cfg.mqtt.heartbeat_s} s`],
    [`${t.base}/event/<type>`, 'QoS 1', 'events from the durable outbox'],
    [
      t.live,
      'QoS 0',
      cfg.mqtt.live_interval_s > 0
        ? `live levels and 1x vectors, at most every ${cfg.mqtt.live_interval_s} s`
        : 'live messages off',
    ],
    [
      t.cmd,
      'QoS 1, subscribed',
      cfg.mqtt.commands ? 'commands (token required)' : 'not subscribed: mqtt.commands is not set',
    ],
    [t.cmdReply, 'QoS 1', 'command replies'],
  ];
  if (json) {
    process.stdout.write(
      JSON.stringify(
        rows.map(([topic, qos, what]) => ({ topic, qos, what })),
        null,
        2,
      ) + '\n',
    );
    return 0;
  }
  const w = Math.max(...rows.map((r) => r[0].length));
  const q = Math.max(...rows.map((r) => r[1].length));
  for (const [topic, qos, what] of rows)
    process.stdout.write(`${topic.padEnd(w)}  ${qos.padEnd(q)}  ${what}\n`);
  return 0;
}

export const mqttCommand: Command = {
  name: 'mqtt',
  usage,
  async run(argv) {
    const { values, positionals } = parseCommandArgs('mqtt', usage, argv, {
      config: { type: 'string' },
      out: { type: 'string' },
      check: { type: 'boolean' },
      json: { type: 'boolean' },
    });
    const action = positionals[0];
    if (action === 'schemas') return schemasAction(values.out, !!values.check);
    if (action === 'outbox' || action === 'topics') {
      if (!values.config)
        throw new UserError('command line', `${action} needs --config CFG`, `usage: ${usage}`);
      return action === 'outbox'
        ? outboxAction(values.config, !!values.json)
        : topicsAction(values.config, !!values.json);
    }
    throw new UserError(
      'command line',
      action ? `unknown action "${action}"` : 'needs an action',
      `usage: ${usage}`,
    );
  },
};
