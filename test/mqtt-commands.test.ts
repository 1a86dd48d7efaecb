import { chmodSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { advisorySettings, SafeStopAdvisory } from '../agent/advisory/advisory.js';
import { LatchFile } from '../agent/advisory/latch-file.js';
import { advisorySchema } from '../agent/config/advisory.js';
import { loadConfig } from '../agent/config/load.js';
import { mqttSchema } from '../agent/config/mqtt.js';
import { UserError } from '../agent/errors.js';
import type { CommandHandlers } from '../agent/mqtt/commands.js';
import { openPlantLink, type PlantLink } from '../agent/mqtt/plant-link.js';
import { CaptureLog } from './support/capture-log.js';
import { FakeGpioLines } from '../drivers/gpio/fake-lines.js';
import { plainBroker } from './support/mosquitto.js';
import { assertMatches } from './support/payload-schemas.js';
import { TestSubscriber } from './support/subscriber.js';

/**
 * Commands over a real broker: every reply is checked against the committed cmd-reply schema; the
 * acknowledge command drives a real advisory (fake GPIO lines); nothing a sender writes stops the
 * agent.
 */
const ASSET = 'kessrow-id3a'; // invented demo fan
const TOKEN = 'id3a-command-token-for-tests-only';
const prefix = `test/${Math.random().toString(36).slice(2, 10)}`;
const base = `${prefix}/${ASSET}`;

let broker: { url: string; dispose(): Promise<void> };
let dir: string;
let link: PlantLink;
let plant: TestSubscriber;
let advisory: SafeStopAdvisory;
let gpio: FakeGpioLines;
const log = new CaptureLog();
const calls: string[] = [];

beforeAll(async () => {
  broker = await plainBroker();
  dir = mkdtempSync(join(tmpdir(), 'tw-cmd-'));
  const tokenFile = join(dir, 'cmd-token');
  writeFileSync(tokenFile, TOKEN + '\n');
  chmodSync(tokenFile, 0o600);
  gpio = new FakeGpioLines();
  const handlers: CommandHandlers = {
    takeSnapshot: (a) => {
      calls.push(`snapshot ${a.note ?? ''}`);
      if (a.note === 'refuse')
        throw new UserError(
          'snapshot',
          'no window analysed yet',
          'wait for the first analysis window',
        );
      if (a.note === 'crash') throw new Error('disk on fire (test)');
      return { snapshot_id: 'snap-1' };
    },
    balancingSession: (a) => {
      calls.push(`balancing ${a.action}`);
      return { session: a.action === 'status' ? 'none' : 'started' };
    },
  };
  link = await openPlantLink({
    mqtt: mqttSchema.parse({
      url: broker.url,
      topic_prefix: prefix,
      commands: { token: { file: tokenFile } },
      reconnect_min_s: 0.1,
    }),
    asset: ASSET,
    stateDir: dir,
    log,
    handlers,
  });
  advisory = await SafeStopAdvisory.start({
    settings: advisorySettings(
      advisorySchema.parse({ relay: { line: 17 }, hold_s: 0 }),
      loadConfig('config/example.yaml').sensors,
    ),
    gpio,
    asset: ASSET,
    emit: (e) => void link.queueEvent(e),
    store: new LatchFile(join(dir, 'advisory.json')),
    log,
    tickMs: 0,
  });
  // Parts started after the link plug their handlers in afterwards.
  handlers.acknowledgeAdvisory = (a) => ({ ...advisory.acknowledge(`mqtt: ${a.by}`) });
  plant = await TestSubscriber.open(broker.url, [`${base}/cmd/reply`, `${base}/event/#`]);
  const until = Date.now() + 10_000;
  while (!link.publisher.isConnected() && Date.now() < until)
    await new Promise((r) => setTimeout(r, 20));
  await new Promise((r) => setTimeout(r, 200)); // the agent's subscription to cmd is in place
});

afterAll(async () => {
  await plant?.close();
  await advisory?.close();
  await link?.close();
  await broker?.dispose();
  rmSync(dir, { recursive: true, force: true });
});

let n = 0;
/** Sends raw bytes to the command topic and returns the next reply (checked against the schema). */
async function send(payload: string | Buffer): Promise<Record<string, any>> {
  const before = plant.on(`${base}/cmd/reply`).length;
  await plant.publish(`${base}/cmd`, payload);
  await plant.waitFor(
    () => plant.on(`${base}/cmd/reply`).length > before,
    10_000,
    `reply to ${String(payload).slice(0, 60)}`,
  );
  const reply = plant.on(`${base}/cmd/reply`)[before]!.json as Record<string, any>;
  assertMatches('cmd-reply.v1', reply);
  return reply;
}
const cmd = (body: Record<string, unknown>) =>
  JSON.stringify({ id: `c-${++n}`, token: TOKEN, ...body });

describe('commands on the command topic', () => {
  it('answers malformed input with a clear error and no crash', async () => {
    expect(await send('this is not json')).toMatchObject({
      ok: false,
      id: null,
      error: { code: 'malformed', message: expect.stringMatching(/not valid JSON/) },
    });
    expect(await send('[1,2,3]')).toMatchObject({
      ok: false,
      error: { code: 'malformed', message: 'a command must be a JSON object' },
    });
    expect(await send(JSON.stringify({ token: TOKEN, cmd: 'snapshot.take' }))).toMatchObject({
      ok: false,
      id: null,
      error: { code: 'malformed', message: expect.stringMatching(/"id"/) },
    });
    expect(await send(Buffer.alloc(20_000, 0x20))).toMatchObject({
      ok: false,
      error: { code: 'too_large' },
    });
  });

  it('refuses a command without the right token and does not run it', async () => {
    const before = calls.length;
    expect(await send(JSON.stringify({ id: 'u-1', cmd: 'snapshot.take' }))).toMatchObject({
      ok: false,
      id: 'u-1',
      error: { code: 'unauthorised' },
    });
    expect(
      await send(JSON.stringify({ id: 'u-2', token: TOKEN + 'x', cmd: 'snapshot.take' })),
    ).toMatchObject({ ok: false, id: 'u-2', error: { code: 'unauthorised' } });
    expect(
      await send(JSON.stringify({ id: 'u-3', token: 42, cmd: 'snapshot.take' })),
    ).toMatchObject({ ok: false, error: { code: 'unauthorised' } });
    expect(calls.length).toBe(before);
    // Refusals are logged once per burst, not once per message.
    expect(log.matching(/command refused \(unauthorised\)/, 'warn')).toHaveLength(1);
  });

  it('names unknown commands and invalid arguments', async () => {
    expect(await send(cmd({ cmd: 'fan.stop' }))).toMatchObject({
      ok: false,
      error: {
        code: 'unknown_command',
        message: expect.stringMatching(/unknown command "fan.stop"; known: advisory.ack/),
      },
    });
    expect(await send(cmd({ cmd: 'advisory.ack', args: {} }))).toMatchObject({
      ok: false,
      error: { code: 'invalid_args', message: expect.stringMatching(/args\.by/) },
    });
    expect(await send(cmd({ cmd: 'balancing.session', args: { action: 'spin' } }))).toMatchObject({
      ok: false,
      error: { code: 'invalid_args', message: expect.stringMatching(/args\.action/) },
    });
  });

  it('routes valid commands to their handlers and answers with the correlation id', async () => {
    expect(
      await send(
        JSON.stringify({
          id: 'snap-a',
          token: TOKEN,
          cmd: 'snapshot.take',
          args: { note: 'before trial weight' },
        }),
      ),
    ).toMatchObject({
      ok: true,
      id: 'snap-a',
      cmd: 'snapshot.take',
      result: { snapshot_id: 'snap-1' },
    });
    expect(await send(cmd({ cmd: 'balancing.session', args: { action: 'status' } }))).toMatchObject(
      { ok: true, result: { session: 'none' } },
    );
    expect(await send(cmd({ cmd: 'baseline.start' }))).toMatchObject({
      ok: false,
      error: { code: 'unavailable' },
    }); // no watcher wired in this test
    expect(await send(cmd({ cmd: 'snapshot.take', args: { note: 'refuse' } }))).toMatchObject({
      ok: false,
      error: {
        code: 'rejected',
        message: expect.stringMatching(/no window analysed yet[\s\S]*wait for the first/),
      },
    });
    expect(await send(cmd({ cmd: 'snapshot.take', args: { note: 'crash' } }))).toMatchObject({
      ok: false,
      error: { code: 'failed', message: 'disk on fire (test)' },
    });
  });

  it('runs a command delivered twice (same id) only once', async () => {
    const before = calls.filter((c) => c.startsWith('balancing')).length;
    const body = JSON.stringify({
      id: 'dup-1',
      token: TOKEN,
      cmd: 'balancing.session',
      args: { action: 'start' },
    });
    const r1 = await send(body);
    const r2 = await send(body);
    expect(r2).toEqual(r1);
    expect(calls.filter((c) => c.startsWith('balancing')).length).toBe(before + 1);
  });

  it('acknowledges a latched advisory with an authorised command; the agent still publishes afterwards', async () => {
    advisory.update({
      t_ms: 0,
      channels: [
        { id: 'DE-V', bearing: 'DE', zone: 'D', ok: true },
        { id: 'DE-H', bearing: 'DE', zone: 'D', ok: true },
      ],
    });
    advisory.update({
      t_ms: 1000,
      channels: [
        { id: 'DE-V', bearing: 'DE', zone: 'B', ok: true },
        { id: 'DE-H', bearing: 'DE', zone: 'B', ok: true },
      ],
    });
    await advisory.settled();
    expect(advisory.state).toBe('latched');
    expect(gpio.level('advisory relay')).toBe(false);
    // An unauthorised acknowledgement changes nothing.
    expect(
      await send(
        JSON.stringify({
          id: 'ack-bad',
          token: 'guess',
          cmd: 'advisory.ack',
          args: { by: 'intruder' },
        }),
      ),
    ).toMatchObject({ ok: false, error: { code: 'unauthorised' } });
    expect(advisory.state).toBe('latched');
    const r = await send(
      JSON.stringify({
        id: 'ack-1',
        token: TOKEN,
        cmd: 'advisory.ack',
        args: { by: 'control room (test)' },
      }),
    );
    expect(r).toMatchObject({
      ok: true,
      id: 'ack-1',
      result: { state: 'normal', outputs_energised: true, changed: true },
    });
    await advisory.settled();
    expect(gpio.level('advisory relay')).toBe(true);
    // The advisory's events reached the plant, in order, each matching its schema.
    await plant.waitFor(
      (m) => m.some((x) => x.topic === `${base}/event/advisory_acknowledged`),
      10_000,
      'the acknowledgement event',
    );
    const types = plant.messages
      .filter((x) => x.topic.startsWith(`${base}/event/`))
      .map((x) => (x.json as { type: string }).type);
    expect(types).toEqual([
      'advisory_started',
      'advisory_raised',
      'advisory_cleared',
      'advisory_acknowledged',
    ]);
    for (const m of plant.messages.filter((x) => x.topic.startsWith(`${base}/event/`)))
      assertMatches('event-advisory.v1', m.json);
    expect(
      plant.messages.find((x) => x.topic.endsWith('/advisory_acknowledged'))!.json,
    ).toMatchObject({ acknowledged_by: 'mqtt: control room (test)' });
    expect(log.text()).not.toContain(TOKEN);
  });
});
