import { randomBytes } from 'node:crypto';
import { mkdirSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { createServer, type Server } from 'node:net';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { packageRoot } from '../../package-root.js';
import { parse } from 'yaml';
import { createSource } from '../../../drivers/create-source.js';
import { FakeGpioLines } from '../../../drivers/gpio/fake-lines.js';
import { systemClock } from '../../clock.js';
import { validateConfig } from '../../config/load.js';
import type { AgentEvent } from '../../events.js';
import { createPinoLogger } from '../../logging/pino-logger.js';
import { assemble } from '../../runtime/assemble.js';
import { UserError } from '../../errors.js';
import { numberOption, parseCommandArgs } from '../args.js';

const num = (
  name: string,
  raw: string | undefined,
  def: number,
  min: number,
  max: number,
): number =>
  numberOption(
    'demo',
    usage,
    name,
    raw,
    (v) => v >= min && v <= max,
    `a number from ${min} to ${max}`,
  ) ?? def;
import type { Command } from '../command.js';

const usage =
  'turnwise demo [--broker mqtt://HOST:PORT] [--mqtt-port N] [--port ' +
  'N] [--speed X] [--from-day D] [--seconds S] [--state-dir DIR]';

const CONFIG_DIR = join(packageRoot(import.meta.url), 'config');

function listenOn(server: Server, port: number): Promise<number> {
  return new Promise<number>((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => {
      server.removeListener('error', reject);
      resolve((server.address() as { port: number }).port);
    });
  });
}

/** The one message for a demo port that another program (often a demo still running) holds. */
function portInUse(option: '--port' | '--mqtt-port', port: number, what: string): UserError {
  return new UserError(
    `${option} ${port}`,
    `port ${port} on 127.0.0.1, for ${what}, is already in use, probably by another ` +
      `turnwise demo${option === '--mqtt-port' ? ' or an MQTT broker such as mosquitto' : ''}`,
    `start the demo on another port, e.g. \`npm start -- ${option} ${port + 1}\` ` +
      `(or ${option} 0 for any free port), or stop the program using port ${port}`,
  );
}

/**
 * Listens on `port`; when the user gave no port and the default is taken, on any free port
 * (reported in the banner); a port the user asked for that is taken ends the demo with one message.
 */
async function listenDemoPort(
  server: Server,
  port: number,
  userGave: boolean,
  option: '--port' | '--mqtt-port',
  what: string,
): Promise<{ port: number; fellBackFrom?: number }> {
  try {
    return { port: await listenOn(server, port) };
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code !== 'EADDRINUSE') throw e;
    if (userGave) throw portInUse(option, port, what);
    return { port: await listenOn(server, 0), fellBackFrom: port };
  }
}

/** Fails with the one message when the live page's port is taken, before anything else starts. */
async function checkPortFree(port: number, option: '--port', what: string): Promise<void> {
  if (port === 0) return;
  const probe = createServer();
  try {
    await listenOn(probe, port);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'EADDRINUSE') throw portInUse(option, port, what);
    throw e;
  } finally {
    await new Promise<void>((r) => (probe.listening ? probe.close(() => r()) : r()));
  }
}

/** Day and time of the scenario for an event, e.g. "day 5 14:23". */
function scenarioTime(ts: string, startMs: number): string {
  const s = (Date.parse(ts) - startMs) / 1000;
  // Events not caused by a measurement (the plant link's own notices) are timed by the wall clock.
  if (s < 0 || s > 30 * 86400) return 'now';
  const day = Math.floor(s / 86400);
  const h = Math.floor((s % 86400) / 3600);
  const m = Math.floor((s % 3600) / 60);
  return `day ${day} ${String(h).padStart(2, '0')}:${String(m).padStart(2, '0')}`;
}

function describeEvent(e: AgentEvent): string {
  const who = (e['sensor'] as string | undefined) ?? (e['scope'] === 'machine' ? 'machine' : '');
  const extra = e['zone']
    ? `zone ${String(e['zone'])}`
    : e['kind']
      ? `kind ${String(e['kind'])}`
      : '';
  return [e.type, who, extra].filter(Boolean).join(' ');
}

export const demoCommand: Command = {
  name: 'demo',
  usage,
  async run(argv) {
    const { values } = parseCommandArgs('demo', usage, argv, {
      broker: { type: 'string' },
      'mqtt-port': { type: 'string' },
      port: { type: 'string' },
      speed: { type: 'string' },
      'from-day': { type: 'string' },
      seconds: { type: 'string' },
      'state-dir': { type: 'string' },
    });
    const speed = num('speed', values.speed, 3600, 1, 1e6);
    const fromDay = num('from-day', values['from-day'], 0, 0, 7);
    const seconds =
      values.seconds === undefined ? Infinity : num('seconds', values.seconds, 0, 1, 1e9);
    const livePort = num('port', values.port, 8480, 0, 65535);
    // A port in use is said at once, naming the option to change, before the broker starts.
    await checkPortFree(livePort, '--port', 'the live page');
    const log = createPinoLogger({ level: 'warn' });

    // The embedded broker (aedes), unless the user gave one.
    let brokerUrl = values.broker;
    let closeBroker = async () => {};
    let brokerNote = '';
    if (!brokerUrl) {
      const { Aedes } = await import('aedes');
      const aedes = await Aedes.createBroker();
      const server = createServer(aedes.handle);
      const bound = await listenDemoPort(
        server,
        num('mqtt-port', values['mqtt-port'], 1883, 0, 65535),
        values['mqtt-port'] !== undefined,
        '--mqtt-port',
        'the embedded MQTT broker',
      ).catch(async (e: unknown) => {
        await new Promise<void>((r) => aedes.close(() => r()));
        throw e;
      });
      const port = bound.port;
      if (bound.fellBackFrom) brokerNote = `, port ${bound.fellBackFrom} was in use`;
      brokerUrl = `mqtt://127.0.0.1:${port}`;
      closeBroker = async () => {
        await new Promise<void>((r) => aedes.close(() => r()));
        await new Promise<void>((r) => server.close(() => r()));
      };
    }

    // State (outbox, advisory latch, history) goes to the user's directory, which is kept, or to a
    // temporary one removed when the demo ends, however it ends (Ctrl-C, --seconds, an error).
    const givenState = values['state-dir'];
    const stateDir =
      givenState !== undefined
        ? resolve(givenState)
        : mkdtempSync(join(tmpdir(), 'turnwise-demo-'));
    if (givenState !== undefined) mkdirSync(stateDir, { recursive: true });
    try {
      const token = randomBytes(18).toString('base64url');
      const configFile = join(CONFIG_DIR, 'example.yaml');
      const raw = parse(readFileSync(configFile, 'utf8')) as Record<string, unknown>;
      const prefix = 'demo/kessrow';
      const cfg = validateConfig(
        {
          ...raw,
          acquisition: {
            driver: 'sim',
            scenario: 'example-scenario.yaml',
            pace: 'realtime',
            time_scale: speed,
            from_day: fromDay,
          },
          mqtt: { url: brokerUrl, topic_prefix: prefix },
          // A laptop has no GPIO lines: the advisory drives lines in memory, shown in events.
          // The demo raises it from zone C (the default is zone D) so the invented week shows one.
          advisory: { relay: { line: 17 }, lamp: { line: 27 }, zone: 'C', hold_s: 1 },
          live: {
            bind: '127.0.0.1',
            port: livePort,
            tokens: [{ name: 'demo-operator', role: 'operator', env: 'TURNWISE_DEMO_TOKEN' }],
          },
          state_dir: stateDir,
        },
        'demo config (config/example.yaml with demo settings)',
      );
      const startMs = Date.UTC(2026, 0, 5, 0, 0, 0) + fromDay * 86400_000;
      const { agent, startLive, stopLive } = await assemble({
        config: cfg,
        clock: systemClock,
        logger: log,
        env: { ...process.env, TURNWISE_DEMO_TOKEN: token },
        // A laptop has no GPIO lines: the advisory drives lines in memory.
        openGpio: () => new FakeGpioLines(),
        openSource: (c) => ({
          source: createSource(c, configFile, { log }).source,
          boardTimesTach: false,
        }),
        startMs,
        timeScale: speed,
        onEvent: (e) =>
          process.stdout.write(
            `  [${scenarioTime(e.ts, startMs - fromDay * 86400_000)}] ` +
              `${e.severity.padEnd(7)} ${describeEvent(e)}\n`,
          ),
      });
      const url = await startLive();
      const [host, port] = brokerUrl.replace('mqtt://', '').split(':');
      process.stdout.write(
        `turnwise demo: the invented Kessrow Board Mill ID fan 3A, simulated (INVENTED DATA)\n` +
          `  live page   ${url}\n` +
          `  token       ${token}   (operator role; the page asks for it)\n` +
          `  MQTT        ${brokerUrl}${values.broker ? '' : ` (embedded broker${brokerNote})`}\n` +
          `  watch with  mosquitto_sub -h ${host} -p ${port ?? 1883} -t '${prefix}/#' -v\n` +
          `  topics      ${prefix}/${cfg.machine.id}/status, ` +
          `/heartbeat, /live, /event/<type>, /cmd, /cmd/reply\n` +
          `  timeline    one scenario day every ${(86400 / speed).toFixed(0)} s: ` +
          `start-up, build-up from day 3, a cable fault on day 4,\n` +
          `              a balance weight thrown on day ` +
          `5 (alarm and safe-stop advisory), stop on day 6\n` +
          `  advisory    demo condition: zone C or worse on two OK channels ` +
          `of one bearing for 1 s of signal (default: zone D for 3 s)\n` +
          `  state       ` +
          `${stateDir}${givenState === undefined ? '   (temporary: removed when the demo ends; --state-dir DIR keeps it)' : ''}\n` +
          `The safe-stop advisory is an advice to people, not ` +
          `a protective trip. Ctrl-C stops the demo.\nEvents:\n`,
      );
      const stop = () => agent.stop();
      process.once('SIGINT', stop);
      process.once('SIGTERM', stop);
      const timer = Number.isFinite(seconds) ? setTimeout(stop, seconds * 1000) : undefined;
      try {
        await agent.run(2000);
      } finally {
        if (timer) clearTimeout(timer);
        await stopLive();
      }
      return 0;
    } finally {
      await closeBroker();
      if (givenState === undefined) {
        try {
          rmSync(stateDir, { recursive: true, force: true });
        } catch (e) {
          process.stderr.write(
            `turnwise demo: could not remove the temporary state ` +
              `directory ${stateDir}: ${(e as Error).message}\n`,
          );
        }
      }
    }
  },
};
