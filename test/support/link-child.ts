/**
 * A child process holding a real plant link (outbox on disk + MQTT publisher), for tests that kill
 * it with SIGKILL. Run: node --import ./test/support/ts-hooks.mjs test/support/link-child.ts
 * '<json>'
 * JSON: { url, prefix, asset, stateDir, mode, count?, idPrefix?, waitForGo? }
 *   mode "add":   queue `count` events, print {"durable": id} as each is on disk, then wait forever
 *   mode "loop":  queue events without end, printing {"durable": id} as each is on disk
 *   mode "drain": queue nothing; print {"drained": true} once the outbox is empty, then exit 0
 * Prints {"connected": true} when the broker accepts the connection. With waitForGo, "add" starts
 * only after a line arrives on stdin.
 */
import { openPlantLink } from '../../agent/mqtt/plant-link.js';
import { mqttSchema } from '../../agent/config/mqtt.js';
import type { Logger } from '../../agent/log.js';

interface ChildArgs {
  url: string;
  prefix: string;
  asset: string;
  stateDir: string;
  mode: 'add' | 'loop' | 'drain';
  count?: number;
  idPrefix?: string;
  waitForGo?: boolean;
}

const args = JSON.parse(process.argv[2] ?? '{}') as ChildArgs;
const say = (o: object) => process.stdout.write(JSON.stringify(o) + '\n');
const log: Logger = {
  debug: () => {},
  info: (f, m) => say({ log: 'info', msg: m }),
  warn: (f, m) => say({ log: 'warn', msg: m }),
  error: (f, m) => say({ log: 'error', msg: m }),
};

const mqtt = mqttSchema.parse({
  url: args.url,
  topic_prefix: args.prefix,
  reconnect_min_s: 0.1,
  reconnect_max_s: 0.5,
  publish_timeout_s: 60,
  heartbeat_s: 3600,
  inflight_window: 4,
});
const link = await openPlantLink({ mqtt, asset: args.asset, stateDir: args.stateDir, log });
const wasConnected = setInterval(() => {
  if (link.publisher.isConnected()) {
    say({ connected: true });
    clearInterval(wasConnected);
  }
}, 10);

const severities = ['info', 'warning', 'alarm'] as const;
let n = 0;
async function addOne(): Promise<void> {
  const i = n++;
  const id = `${args.idPrefix ?? 'ev'}-${String(i).padStart(5, '0')}`;
  const outcome = await link.queueEvent({
    id,
    ts: new Date().toISOString(),
    asset: args.asset,
    type: 'test_step',
    severity: severities[i % 3]!,
    step: i,
    padding: 'x'.repeat(200),
  });
  if (outcome === 'durable') say({ durable: id });
  else say({ not_durable: id, outcome });
}

if (args.waitForGo) {
  await new Promise<void>((resolve) => process.stdin.once('data', () => resolve()));
}
if (args.mode === 'add') {
  for (let i = 0; i < (args.count ?? 10); i++) await addOne();
  say({ all_durable: true });
  setInterval(() => {}, 1 << 30);
} else if (args.mode === 'loop') {
  for (;;) await addOne();
} else {
  const ok = await link.drain(30_000);
  say({ drained: ok });
  await link.close();
  process.exit(ok ? 0 : 1);
}
