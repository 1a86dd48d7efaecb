import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { freePort, plainBroker } from './support/mosquitto.js';
import { TestSubscriber } from './support/subscriber.js';
import { expectNoStack, runCli } from './support/cli.js';
import { synthesize } from './support/synth.js';
import { writeFloatWav } from './support/wav.js';

/** `turnwise run` on a recording as fast as it goes, as a real process, against a real broker. */
describe('turnwise run on a recording', () => {
  let broker: { url: string; dispose(): Promise<void> };
  const dir = mkdtempSync(join(tmpdir(), 'tw-run-'));
  const fs = 5120;
  beforeAll(async () => {
    broker = await plainBroker();
    // Zone D at both radial sensors of the DE bearing for the whole record (ISO 20816-3 group 2
    // rigid, C/D 4.5 mm/s r.m.s.).
    const sig = synthesize({
      sampleRate: fs,
      seconds: 20,
      rpm: () => 1485,
      channels: [
        { orders: [{ order: 1, velPk: 9, phaseDeg: 30 }] },
        { orders: [{ order: 1, velPk: 8, phaseDeg: 120 }] },
      ],
      tachChannel: 2,
    });
    writeFloatWav(join(dir, 'rec.wav'), fs, sig);
  });
  afterAll(async () => {
    await broker?.dispose();
  });

  const config = (
    url: string,
    prefix: string,
    stateDir: string,
  ) => `machine: {id: kessrow-id3a, group: 2, support: rigid, rated_rpm: 1485}
tach: {channel: 2, trigger_v: 2.5}
sensors:
  - {id: DE-V, channel: 0, bearing: DE, direction: vertical, sensitivity_mv_per_g: 100}
  - {id: DE-H, channel: 1, bearing: DE, direction: horizontal, sensitivity_mv_per_g: 100}
acquisition: {driver: wav, file: rec.wav, realtime: false}
mqtt: {url: "${url}", topic_prefix: ${prefix}, publish_timeout_s: 2}
state_dir: ${stateDir}
logging: {level: warn}
`;

  it('exits 0 at the end, keeps undelivered events on disk, and sends them at the next start', async () => {
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const state = join(dir, 'state1');
    const cfgFile = join(dir, 'fan.yaml');
    // First run: nothing listens on this port (the broker is "down").
    const deadPort = await freePort();
    writeFileSync(cfgFile, config(`mqtt://127.0.0.1:${deadPort}`, prefix, state));
    const r1 = runCli(
      ['run', '--config', cfgFile, '--drain-timeout-s', '1', '--last-good', join(dir, 'lg1.yaml')],
      { env: { STATE_DIRECTORY: '' } },
    );
    expectNoStack(r1.stderr);
    expect(r1.code).toBe(0);
    const kept = readdirSync(join(state, 'outbox')).filter((f) => f.endsWith('.rec'));
    expect(kept.length).toBeGreaterThan(0);
    // Second run: the broker is up; the kept events go out first, in order, with their ids.
    const sub = await TestSubscriber.open(broker.url, [`${prefix}/#`]);
    writeFileSync(cfgFile, config(broker.url, prefix, state));
    const r2 = runCli([
      'run',
      '--config',
      cfgFile,
      '--drain-timeout-s',
      '10',
      '--last-good',
      join(dir, 'lg1.yaml'),
    ]);
    expect(r2.code).toBe(0);
    // The watcher remembers what it reported, so the second run adds nothing new about the same
    // state.
    await sub.waitFor(
      (m) => m.filter((x) => x.topic.includes('/event/')).length >= kept.length,
      10_000,
      'the events kept on disk',
    );
    const events = sub.messages
      .filter((m) => m.topic.includes('/event/'))
      .map((m) => m.json as { id: string; type: string; zone?: string });
    expect(events.some((e) => e.type === 'zone_changed' && e.zone === 'D')).toBe(true);
    expect(new Set(events.map((e) => e.id)).size).toBe(events.length);
    expect(readdirSync(join(state, 'outbox')).filter((f) => f.endsWith('.rec'))).toEqual([]);
    await sub.close();
  });

  it('runs on the last good config when the new one is broken, and says so on MQTT', async () => {
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const state = join(dir, 'state2');
    const cfgFile = join(dir, 'fan2.yaml');
    const lastGood = join(dir, 'lg2.yaml');
    writeFileSync(cfgFile, config(broker.url, prefix, state));
    expect(runCli(['run', '--config', cfgFile, '--last-good', lastGood]).code).toBe(0);
    const sub = await TestSubscriber.open(broker.url, [`${prefix}/+/event/config_rejected`]);
    writeFileSync(cfgFile, config(broker.url, prefix, state).replace('group: 2', 'group: 7'));
    const r = runCli(['run', '--config', cfgFile, '--last-good', lastGood]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/config rejected, monitoring continues on the last good config/);
    await sub.waitFor((m) => m.length > 0, 10_000, 'config_rejected');
    expect((sub.messages[0]!.json as { severity: string; error: string }).severity).toBe('alarm');
    expect((sub.messages[0]!.json as { error: string }).error).toMatch(/machine\.group/);
    await sub.close();
    // Without a last good copy the agent refuses to start, with the same clear message.
    const r3 = runCli(['run', '--config', cfgFile, '--last-good', join(dir, 'none.yaml')]);
    expect(r3.code).toBe(2);
    expectNoStack(r3.stderr);
    expect(r3.stderr).toMatch(/machine\.group/);
  });

  it('refuses a config that loads but cannot start the agent: back to the last good one, which it never overwrites', async () => {
    const prefix = `test/${Math.random().toString(16).slice(2)}`;
    const state = join(dir, 'state3');
    const cfgFile = join(dir, 'fan3.yaml');
    const lastGood = join(dir, 'lg3.yaml');
    const good = config(broker.url, prefix, state);
    writeFileSync(cfgFile, good);
    expect(runCli(['run', '--config', cfgFile, '--last-good', lastGood]).code).toBe(0);
    expect(readFileSync(lastGood, 'utf8')).toBe(good);
    // a fresh watcher, so the fallback run reports the zones again
    rmSync(state, { recursive: true });
    // Valid YAML and schema, but the recording it names does not exist: the agent cannot measure.
    const sub = await TestSubscriber.open(broker.url, [`${prefix}/+/event/#`]);
    writeFileSync(cfgFile, good.replace('file: rec.wav', 'file: no-such-recording.wav'));
    const r = runCli(['run', '--config', cfgFile, '--last-good', lastGood]);
    expectNoStack(r.stderr);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(
      /config rejected, monitoring continues on the last good config: .*no-such-recording\.wav/,
    );
    await sub.waitFor(
      (m) => m.some((x) => x.topic.endsWith('/event/config_rejected')),
      10_000,
      'config_rejected',
    );
    const rejected = sub.messages.find((x) => x.topic.endsWith('/event/config_rejected'))!.json as {
      severity: string;
      error: string;
    };
    expect(rejected).toMatchObject({
      severity: 'alarm',
      error: expect.stringMatching(/no-such-recording\.wav/),
    });
    // It measured on the last good config (the recording it names), and the failing config was not
    // kept.
    await sub.waitFor(
      (m) => m.some((x) => x.topic.endsWith('/event/zone_changed')),
      10_000,
      'zone events from the fallback run',
    );
    expect(readFileSync(lastGood, 'utf8')).toBe(good);
    await sub.close();
    // Without a different last good copy the start-up error is the answer, as a clear message.
    const r2 = runCli(['run', '--config', cfgFile, '--last-good', join(dir, 'none3.yaml')]);
    expect(r2.code).toBe(2);
    expectNoStack(r2.stderr);
    expect(r2.stderr).toMatch(/no-such-recording\.wav/);
  });
});
