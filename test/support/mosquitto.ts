import { execFileSync, spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { connect as netConnect, createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { makeTestCerts, type TestCerts } from './certs.js';

/**
 * A real mosquitto broker for tests: started on free loopback ports with a config written to a
 * temporary directory, optionally with password users, an ACL and a TLS listener whose CA and
 * certificates are made here with openssl. Persistence is on, so a graceful restart keeps
 * persistent sessions and their queued messages, as a production broker would.
 */
export interface MosquittoOptions {
  /** user -> password; when given, anonymous clients are refused. */
  readonly users?: Readonly<Record<string, string>>;
  /** ACL file text (mosquitto syntax). */
  readonly acl?: string;
  /** Adds a TLS listener; `requireClientCert` makes the broker ask for the client certificate. */
  readonly tls?: { readonly requireClientCert: boolean };
  /** Plain listener port (default: a free one). */
  readonly port?: number;
  /**
   * Further lines for mosquitto.conf, before the listeners (e.g. "max_packet_size 2048",
   * "max_inflight_messages 2").
   */
  readonly extraConfig?: readonly string[];
}

export const MOSQUITTO_BIN =
  process.env.TURNWISE_MOSQUITTO ??
  (existsSync('/usr/sbin/mosquitto') ? '/usr/sbin/mosquitto' : 'mosquitto');

export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = createServer();
    srv.once('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const addr = srv.address();
      srv.close(() =>
        addr && typeof addr === 'object' ? resolve(addr.port) : reject(new Error('no port')),
      );
    });
  });
}

function canConnect(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const s = netConnect({ port, host: '127.0.0.1' });
    s.once('connect', () => {
      s.destroy();
      resolve(true);
    });
    s.once('error', () => resolve(false));
  });
}

export class Mosquitto {
  readonly dir: string;
  port = 0;
  tlsPort = 0;
  certs: TestCerts | null = null;
  private proc: ChildProcess | null = null;
  private log = '';

  private constructor(private readonly opts: MosquittoOptions) {
    this.dir = mkdtempSync(join(tmpdir(), 'tw-mosq-'));
  }

  static async start(opts: MosquittoOptions = {}): Promise<Mosquitto> {
    const m = new Mosquitto(opts);
    if (opts.tls) m.certs = makeTestCerts(m.dir);
    if (opts.users) m.setUsers(opts.users);
    for (let attempt = 0; ; attempt++) {
      m.port = opts.port ?? (await freePort());
      if (opts.tls) m.tlsPort = await freePort();
      m.writeConfig();
      try {
        await m.launch();
        return m;
      } catch (e) {
        if (attempt >= 3) throw e;
      }
    }
  }

  get url(): string {
    return `mqtt://127.0.0.1:${this.port}`;
  }

  get tlsUrl(): string {
    return `mqtts://127.0.0.1:${this.tlsPort}`;
  }

  /** Broker's own log so far (for failing-test diagnostics). */
  get output(): string {
    return this.log;
  }

  /** Rewrites the password file; takes effect at start or on reload(). */
  setUsers(users: Readonly<Record<string, string>>): void {
    const file = join(this.dir, 'passwd');
    rmSync(file, { force: true });
    for (const [user, pass] of Object.entries(users)) {
      execFileSync(
        'mosquitto_passwd',
        [...(existsSync(file) ? [] : ['-c']), '-b', file, user, pass],
        { stdio: 'ignore' },
      );
    }
  }

  private writeConfig(): void {
    const o = this.opts;
    const lines = [
      'per_listener_settings false',
      'user root',
      `allow_anonymous ${o.users ? 'false' : 'true'}`,
      ...(o.users ? [`password_file ${join(this.dir, 'passwd')}`] : []),
      ...(o.acl ? [`acl_file ${join(this.dir, 'acl')}`] : []),
      'persistence true',
      `persistence_location ${this.dir}/`,
      'log_dest stderr',
      'log_type error',
      'log_type warning',
      'log_type notice',
      'log_type information',
      ...(o.extraConfig ?? []),
      `listener ${this.port} 127.0.0.1`,
    ];
    if (o.tls && this.certs) {
      lines.push(
        `listener ${this.tlsPort} 127.0.0.1`,
        `cafile ${this.certs.caCert}`,
        `certfile ${this.certs.serverCert}`,
        `keyfile ${this.certs.serverKey}`,
        `require_certificate ${o.tls.requireClientCert ? 'true' : 'false'}`,
      );
    }
    if (o.acl) writeFileSync(join(this.dir, 'acl'), o.acl);
    writeFileSync(join(this.dir, 'mosquitto.conf'), lines.join('\n') + '\n');
  }

  private async launch(): Promise<void> {
    const p = spawn(MOSQUITTO_BIN, ['-c', join(this.dir, 'mosquitto.conf')], {
      stdio: ['ignore', 'ignore', 'pipe'],
    });
    this.proc = p;
    p.stderr!.on('data', (d: Buffer) => {
      this.log += d.toString();
    });
    let exited = false;
    p.once('exit', () => {
      exited = true;
    });
    const until = Date.now() + 10_000;
    while (Date.now() < until) {
      if (exited) throw new Error(`mosquitto exited at start:\n${this.log}`);
      if (await canConnect(this.port)) {
        if (!this.opts.tls || (await canConnect(this.tlsPort))) return;
      }
      await new Promise((r) => setTimeout(r, 50));
    }
    p.kill('SIGKILL');
    throw new Error(`mosquitto did not open port ${this.port} within 10 s:\n${this.log}`);
  }

  /**
   * Stops the broker gracefully (SIGTERM: it saves persistent sessions) and waits for it to exit.
   */
  async stop(): Promise<void> {
    const p = this.proc;
    this.proc = null;
    if (!p || p.exitCode !== null || p.signalCode !== null) return;
    await new Promise<void>((resolve) => {
      const t = setTimeout(() => p.kill('SIGKILL'), 5000);
      p.once('exit', () => {
        clearTimeout(t);
        resolve();
      });
      p.kill('SIGTERM');
    });
  }

  /** Stops and starts the broker on the same ports. */
  async restart(): Promise<void> {
    await this.stop();
    await this.launch();
  }

  /** SIGHUP: re-reads the password file and ACL. */
  reload(): void {
    this.proc?.kill('SIGHUP');
  }

  /** Stops the broker and deletes its directory. */
  async dispose(): Promise<void> {
    await this.stop();
    rmSync(this.dir, { recursive: true, force: true });
  }
}

/**
 * A broker for tests that need nothing special: TURNWISE_TEST_MQTT_URL when CI provides one,
 * otherwise a fresh mosquitto. Tests use unique topic prefixes, so a shared broker is safe.
 */
export async function plainBroker(): Promise<{ url: string; dispose(): Promise<void> }> {
  const shared = process.env.TURNWISE_TEST_MQTT_URL;
  if (shared) return { url: shared, dispose: async () => {} };
  const m = await Mosquitto.start();
  return { url: m.url, dispose: () => m.dispose() };
}
