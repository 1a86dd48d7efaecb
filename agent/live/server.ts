/**
 * The technician's page: an HTTP + WebSocket server (node:http or node:https, and ws) that serves
 * the live 1x view and the balancing workbench. It is an output of the agent: it takes live frames
 * and analysis windows from the runtime (LiveConsumer, WindowConsumer) and the watcher's status,
 * and it never touches the measurement path (sending is throttled and skipped for slow clients).
 *
 * Access: every API request carries `Authorization: Bearer TOKEN`; a WebSocket sends
 * {"type":"hello","token":"..."} as its first message (or carries the same header). Viewing needs a
 * viewer or operator token; changing a balancing job needs an operator token. Tokens are never
 * logged. The static page files need no token: they hold no plant data.
 */
import {
  createServer as createHttpServer,
  type IncomingMessage,
  type Server,
  type ServerResponse,
} from 'node:http';
import { createServer as createHttpsServer } from 'node:https';
import { createReadStream, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { isCaptureId, listCaptures } from '../capture/event-capture.js';
import type { LiveSweep } from '../sweep/recorder.js';
import type { SweepEvidence } from '../watcher/rules/types.js';
import { isSweepId, SweepStore, type StoredSweep } from '../sweep/store.js';
import type { AddressInfo, Socket } from 'node:net';
import { WebSocketServer, type WebSocket } from 'ws';
import { FileBalanceStore, type BalanceStore } from '../balance/store.js';
import { BalancingWorkbench } from '../balance/workbench/actions.js';
import { captureSettingsFrom, type CaptureSettings } from '../balance/workbench/capture.js';
import { ApiError } from '../balance/workbench/requests.js';
import {
  combineTool,
  fourRunTool,
  gradeTool,
  moveRadiusTool,
  oneXAmplitudeTool,
  splitTool,
  trialWeightTool,
} from '../balance/workbench/tools.js';
import type { JobView } from '../balance/workbench/view.js';
import type { Clock } from '../clock.js';
import type { LiveConfig } from '../config/live.js';
import type { Config } from '../config/schema.js';
import type { LiveFrame, WindowResult } from '../dsp/types.js';
import { UserError } from '../errors.js';
import type { AgentEvent } from '../events.js';
import type { Logger } from '../log.js';
import { BurstLog } from '../burst-log.js';
import { readSecretFile } from '../mqtt/secrets.js';
import type { LiveConsumer, WindowConsumer } from '../runtime/runtime.js';
import type { WatchStatus } from '../watcher/index.js';
import {
  bearerToken,
  mayAct,
  resolveLiveTokens,
  TokenCheck,
  type LiveToken,
  type Principal,
} from './auth.js';
import { loadStaticFiles, type StaticFile } from './static.js';
import { LiveView, sessionView, type PageMessage, type SessionView } from './view.js';

export interface LiveServerOptions {
  readonly config: Config;
  /** The `live` section (defaults applied). */
  readonly live: LiveConfig;
  /** Resolved tokens (resolveLiveTokens). */
  readonly tokens: readonly LiveToken[];
  readonly logger: Logger;
  readonly clock: Clock;
  /** Hands an event to the outputs (MQTT outbox); called after the job record is saved. */
  readonly emit: (e: AgentEvent) => void | Promise<void>;
  /**
   * Called after a finished job's influence coefficients were stored (e.g.
   * watcher.reloadCoefficients()).
   */
  readonly onCoefficientsSaved?: () => void;
  /** Where jobs are kept; default FileBalanceStore(config.state_dir). */
  readonly store?: BalanceStore;
  /**
   * Memory of the runtime's live average, revolutions (AgentRuntime liveRevolutions; default 32).
   */
  readonly liveRevolutions?: number;
  /**
   * Resonances of the last recorded sweep (the workbench warns when balancing inside one's band).
   */
  readonly sweepEvidence?: () => SweepEvidence | null;
  /**
   * The run-up or coast-down going on now (the agent's sweep recorder); pushed to the page at each
   * window.
   */
  readonly sweepLive?: () => LiveSweep | null;
  /** Directory of the page files; default the package's agent/live/page. */
  readonly pageDir?: string;
}

/** Largest request body accepted, bytes. */
export const MAX_BODY_BYTES = 64 * 1024;
/** A WebSocket that has not said hello with a valid token by then is closed, ms. */
const HELLO_TIMEOUT_MS = 5000;
/** Clients with more than this waiting to be sent are skipped until they catch up, bytes. */
const MAX_BUFFERED_BYTES = 512 * 1024;
const PING_MS = 30_000;

const SECURITY_HEADERS: Record<string, string> = {
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer',
  'X-Frame-Options': 'DENY',
  'Content-Security-Policy':
    "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; " +
    "connect-src 'self'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'",
};

interface Client {
  readonly ws: WebSocket;
  principal: Principal | null;
  alive: boolean;
}

type Handler = (ctx: {
  req: IncomingMessage;
  principal: Principal;
  params: string[];
  body: unknown;
}) => Promise<unknown> | unknown;

/** A file sent as it is (capture downloads), streamed from disk. */
class FileReply {
  constructor(
    readonly path: string,
    readonly type: string,
    readonly filename: string,
  ) {}
}

const CAPTURE_FILES: Record<string, string> = {
  wav: 'audio/wav',
  yaml: 'application/yaml; charset=utf-8',
  json: 'application/json; charset=utf-8',
};

/** What the sweep list shows of each stored sweep (the points come with /api/sweeps/ID). */
export function sweepSummary(s: StoredSweep) {
  return {
    id: s.id,
    ts: s.ts,
    end_ts: s.end_ts,
    direction: s.direction,
    from_rpm: s.from_rpm,
    to_rpm: s.to_rpm,
    duration_s: s.duration_s,
    reference: s.reference,
    compared_with: s.compared_with,
    resonances: s.channels.flatMap((c) =>
      c.resonances.map((r) => ({
        sensor: c.id,
        rpm: r.rpm,
        amplification_factor: r.amplification_factor,
        margin_ok: r.margin_ok,
      })),
    ),
  };
}

interface Route {
  readonly method: 'GET' | 'POST';
  readonly pattern: RegExp;
  readonly act: boolean;
  readonly handler: Handler;
  /** Answer with this content disposition (downloads). */
  readonly download?: (params: string[]) => string;
}

export class LiveServer implements LiveConsumer, WindowConsumer {
  readonly workbench: BalancingWorkbench;
  readonly view: LiveView;
  private readonly opts: LiveServerOptions;
  private readonly check: TokenCheck;
  private readonly burst: BurstLog;
  private readonly routes: Route[];
  private files: Map<string, StaticFile> | null = null;
  private server: Server | null = null;
  private wss: WebSocketServer | null = null;
  private readonly clients = new Set<Client>();
  private readonly sockets = new Set<Socket>();
  private liveDirty = false;
  private jobDirty = false;
  private lastFlush = 0;
  private flushTimer: NodeJS.Timeout | null = null;
  private pingTimer: NodeJS.Timeout | null = null;
  private readonly captureSettings: CaptureSettings;
  private sweepShown = false;

  constructor(opts: LiveServerOptions) {
    this.opts = opts;
    this.check = new TokenCheck(opts.tokens);
    this.burst = new BurstLog(opts.logger, { nowMs: () => opts.clock.now(), quietMs: 60_000 });
    this.view = new LiveView(opts.config, opts.live.trail_points, opts.live.trend_max_points);
    this.captureSettings = captureSettingsFrom(opts.live.capture, opts.liveRevolutions);
    this.workbench = new BalancingWorkbench({
      config: opts.config,
      store: opts.store ?? new FileBalanceStore(opts.config.state_dir),
      clock: opts.clock,
      logger: opts.logger,
      emit: opts.emit,
      onCoefficientsSaved: opts.onCoefficientsSaved,
      capture: this.captureSettings,
      liveSpeed: () => this.view.speedRpm,
      ...(opts.sweepEvidence ? { sweepEvidence: opts.sweepEvidence } : {}),
      onChange: () => this.markDirty('job'),
    });
    this.routes = this.buildRoutes();
  }

  /**
   * Reads the tokens named in `config.live` and builds the server. UserError when the section is
   * missing or a token is unusable.
   */
  static fromConfig(
    config: Config,
    deps: Omit<LiveServerOptions, 'config' | 'live' | 'tokens'>,
    env: NodeJS.ProcessEnv = process.env,
  ): LiveServer {
    if (!config.live)
      throw new UserError(
        'live',
        'the config has no live section',
        'add live: with bind, port and tokens (docs/live-page.md, "Opening it")',
      );
    return new LiveServer({
      ...deps,
      config,
      live: config.live,
      tokens: resolveLiveTokens(config.live, env),
    });
  }

  /** Loads the page files, reopens a job left open, and listens. Resolves with the page's URL. */
  async start(): Promise<{ url: string; port: number }> {
    if (this.server) throw new Error('LiveServer already started');
    const { live, logger } = this.opts;
    this.files = loadStaticFiles(this.opts.pageDir);
    await this.workbench.restore();
    const handler = (req: IncomingMessage, res: ServerResponse) => void this.handle(req, res);
    let server: Server;
    if (live.tls) {
      const key = readSecretFile(live.tls.key_file, 'live.tls.key_file');
      let cert: Buffer;
      try {
        cert = readFileSync(live.tls.cert_file);
      } catch (e) {
        throw new UserError(
          'live.tls.cert_file',
          `cannot read ${live.tls.cert_file} (${(e as NodeJS.ErrnoException).code})`,
          'give the PEM certificate of the page',
        );
      }
      server = createHttpsServer({ key, cert }, handler) as unknown as Server;
    } else {
      server = createHttpServer(handler);
    }
    server.headersTimeout = 20_000;
    server.requestTimeout = 30_000;
    server.on('connection', (s: Socket) => {
      this.sockets.add(s);
      s.on('close', () => this.sockets.delete(s));
    });
    const wss = new WebSocketServer({ noServer: true, maxPayload: 4096 });
    server.on('upgrade', (req, socket, head) => {
      if (new URL(req.url ?? '/', 'http://x').pathname !== '/ws') {
        socket.destroy();
        return;
      }
      wss.handleUpgrade(req, socket, head, (ws) => this.accept(ws, req));
    });
    await new Promise<void>((resolve, reject) => {
      const onError = (e: NodeJS.ErrnoException) => {
        const why =
          e.code === 'EADDRINUSE'
            ? `port ${live.port} is already in use on ${live.bind}`
            : e.code === 'EACCES'
              ? `not allowed to listen on port ${live.port}`
              : e.code === 'EADDRNOTAVAIL'
                ? `${live.bind} is not an address of this board`
                : `cannot listen on ${live.bind}:${live.port} (${e.code ?? e.message})`;
        reject(
          new UserError(
            'live',
            why,
            'change live.bind or live.port (ports below ' +
              '1024 need privileges), or stop the program using it',
          ),
        );
      };
      server.once('error', onError);
      server.listen(live.port, live.bind, () => {
        server.off('error', onError);
        resolve();
      });
    });
    server.on('error', (e) => logger.error({ error: e.message }, 'live page server error'));
    this.server = server;
    this.wss = wss;
    this.pingTimer = setInterval(() => this.pingClients(), PING_MS);
    this.pingTimer.unref();
    const port = (server.address() as AddressInfo).port;
    const host = live.bind.includes(':') ? `[${live.bind}]` : live.bind;
    const url = `${live.tls ? 'https' : 'http'}://${host}:${port}/`;
    logger.info(
      { url, tls: !!live.tls, tokens: this.opts.tokens.map((t) => `${t.name} (${t.role})`) },
      'live page listening',
    );
    if (
      !live.tls &&
      live.bind !== '127.0.0.1' &&
      live.bind !== '::1' &&
      live.bind !== 'localhost'
    ) {
      logger.warn(
        { bind: live.bind },
        'the live page is served without TLS beyond this board: tokens cross ' +
          'the network in clear; set live.tls or use a trusted network segment',
      );
    }
    return { url, port };
  }

  /**
   * Closes every connection and stops listening. A capture in progress is dropped (the run stays
   * declared).
   */
  async stop(): Promise<void> {
    if (this.flushTimer) clearTimeout(this.flushTimer);
    if (this.pingTimer) clearInterval(this.pingTimer);
    this.flushTimer = this.pingTimer = null;
    for (const c of this.clients) c.ws.terminate();
    this.clients.clear();
    this.wss?.close();
    const server = this.server;
    this.server = null;
    this.wss = null;
    if (server) {
      const closed = new Promise<void>((resolve) => server.close(() => resolve()));
      for (const s of this.sockets) s.destroy();
      await closed;
    }
  }

  // ---- consumers ----

  onLive(f: LiveFrame, atMs: number): void {
    this.view.onLive(f, atMs);
    this.workbench.onLive(f, atMs);
    this.markDirty('live');
  }

  onWindow(w: WindowResult, atMs: number): void {
    const point = this.view.onWindow(w, atMs);
    this.send({ type: 'trend_point', point });
    const sweep = this.opts.sweepLive?.() ?? null;
    // While a run-up or coast-down goes on, the page draws it as it happens (and once more when it
    // has ended).
    if (sweep || this.sweepShown) this.send({ type: 'sweep_live', sweep });
    this.sweepShown = sweep !== null;
    this.markDirty('live');
  }

  /** A sweep was recorded and stored: the page adds it to its list. */
  onSweep(s: StoredSweep): void {
    this.send({ type: 'sweep_recorded', sweep: sweepSummary(s) });
  }

  /** The watcher's status after each window (zones and sensor health shown per channel). */
  onWatch(status: WatchStatus): void {
    this.view.onWatch(status);
    this.markDirty('live');
  }

  // ---- WebSocket ----

  private accept(ws: WebSocket, req: IncomingMessage): void {
    const client: Client = { ws, principal: null, alive: true };
    const remote = req.socket.remoteAddress ?? 'unknown';
    const timer = setTimeout(() => {
      if (!client.principal) ws.close(4401, 'no hello with a token');
    }, HELLO_TIMEOUT_MS);
    ws.on('pong', () => (client.alive = true));
    ws.on('close', () => {
      clearTimeout(timer);
      this.clients.delete(client);
    });
    ws.on('error', () => undefined);
    const admit = (p: Principal) => {
      client.principal = p;
      clearTimeout(timer);
      this.clients.add(client);
      this.sendTo(client, { type: 'welcome', session: this.session(p) });
      this.sendTo(client, { type: 'trend', points: this.view.trend() });
      this.sendTo(client, { type: 'live', live: this.view.snapshot() });
      this.sendTo(client, { type: 'job', view: this.workbench.view() });
    };
    const headerToken = bearerToken(req.headers.authorization);
    if (headerToken !== null) {
      const p = this.check.identify(headerToken);
      if (!p) return this.refuseWs(ws, remote);
      admit(p);
    }
    ws.on('message', (data, isBinary) => {
      if (client.principal) return; // nothing else is expected from the page
      let msg: unknown;
      try {
        msg = isBinary ? null : JSON.parse(data.toString());
      } catch {
        msg = null;
      }
      const m = msg as { type?: unknown; token?: unknown } | null;
      if (!m || m.type !== 'hello') {
        ws.close(4400, 'the first message must be {"type":"hello","token":"..."}');
        return;
      }
      const p = this.check.identify(m.token);
      if (!p) return this.refuseWs(ws, remote);
      admit(p);
    });
  }

  private refuseWs(ws: WebSocket, remote: string): void {
    this.refused(remote, 'websocket');
    const refusal: PageMessage = {
      type: 'error',
      code: 'unauthorised',
      message: 'missing or wrong token',
    };
    ws.send(JSON.stringify(refusal));
    ws.close(4401, 'unauthorised');
  }

  private pingClients(): void {
    for (const c of this.clients) {
      if (!c.alive) {
        c.ws.terminate();
        this.clients.delete(c);
        continue;
      }
      c.alive = false;
      c.ws.ping();
    }
  }

  private sendTo(c: Client, msg: PageMessage): void {
    if (c.ws.readyState !== c.ws.OPEN || c.ws.bufferedAmount > MAX_BUFFERED_BYTES) return;
    c.ws.send(JSON.stringify(msg));
  }

  private send(msg: PageMessage): void {
    if (this.clients.size === 0) return;
    const text = JSON.stringify(msg);
    for (const c of this.clients) {
      if (c.ws.readyState === c.ws.OPEN && c.ws.bufferedAmount <= MAX_BUFFERED_BYTES)
        c.ws.send(text);
    }
  }

  private markDirty(what: 'live' | 'job'): void {
    if (what === 'live') this.liveDirty = true;
    else this.jobDirty = true;
    if (this.flushTimer || !this.server) return;
    const period = 1000 / this.opts.live.update_hz;
    const wait = Math.max(0, this.lastFlush + period - performance.now());
    this.flushTimer = setTimeout(() => this.flush(), wait);
  }

  private flush(): void {
    this.flushTimer = null;
    this.lastFlush = performance.now();
    if (this.liveDirty) this.send({ type: 'live', live: this.view.snapshot() });
    if (this.jobDirty) this.send({ type: 'job', view: this.workbench.view() });
    this.liveDirty = this.jobDirty = false;
  }

  // ---- HTTP ----

  private session(p: Principal): SessionView {
    return sessionView(this.opts.config, this.opts.live, this.captureSettings, p);
  }

  private buildRoutes(): Route[] {
    const wb = this.workbench;
    const by = (p: Principal) => ({ token: p.name, role: p.role });
    const jobView = (v: JobView | null) => ({ view: v });
    const r = (
      method: Route['method'],
      path: string,
      act: boolean,
      handler: Handler,
      download?: Route['download'],
    ): Route => ({
      method,
      pattern: new RegExp(
        `^${path
          .replace(/:id/g, '([A-Za-z0-9][A-Za-z0-9_.-]{0,63})')
          .replace(/:n/g, '([0-9]{1,4})')
          .replace(/:cid/g, '([0-9]{8}T[0-9]{6}Z-[0-9]{1,9})')
          .replace(/:ext/g, '(wav|yaml|json)')
          .replace(/:sid/g, '([0-9]{8}T[0-9]{6}Z-(?:up|down)(?:-[0-9]{1,4})?)')}$`,
      ),
      act,
      handler,
      ...(download ? { download } : {}),
    });
    return [
      r('GET', '/api/session', false, ({ principal }) => this.session(principal)),
      r('GET', '/api/live', false, () => this.view.snapshot()),
      r('GET', '/api/trend', false, () => ({ points: this.view.trend() })),
      r('GET', '/api/jobs', false, async () => ({
        jobs: await wb.listJobs(),
        open: wb.activeJob?.job_id ?? null,
      })),
      r('GET', '/api/jobs/open', false, () => jobView(wb.view())),
      r('GET', '/api/jobs/:id', false, async ({ params }) =>
        jobView(wb.view(await wb.getJob(params[0]!))),
      ),
      r(
        'GET',
        '/api/jobs/:id/export',
        false,
        async ({ params }) => wb.exportJob(params[0]!),
        (p) => `attachment; filename="${p[0]}.json"`,
      ),
      r('POST', '/api/jobs', true, async ({ principal, body }) =>
        jobView(await wb.createJob(body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/runs', true, async ({ principal, body, params }) =>
        jobView(await wb.declareRun(params[0]!, body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/runs/:n/discard', true, async ({ principal, body, params }) =>
        jobView(await wb.discardRun(params[0]!, Number(params[1]), body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/capture', true, async ({ principal, body, params }) =>
        jobView(await wb.startCapture(params[0]!, body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/capture/cancel', true, async ({ principal, body, params }) =>
        jobView(await wb.cancelCapture(params[0]!, body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/solve', true, async ({ principal, body, params }) =>
        jobView(await wb.solve(params[0]!, body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/finish', true, async ({ principal, body, params }) =>
        jobView(await wb.finish(params[0]!, body, by(principal))),
      ),
      r('POST', '/api/jobs/:id/abandon', true, async ({ principal, body, params }) =>
        jobView(await wb.abandon(params[0]!, body, by(principal))),
      ),
      r('POST', '/api/tools/trial-weight', false, ({ body }) => trialWeightTool(body)),
      r('POST', '/api/tools/split', false, ({ body }) => splitTool(body)),
      r('POST', '/api/tools/combine', false, ({ body }) => combineTool(body)),
      r('POST', '/api/tools/move-radius', false, ({ body }) => moveRadiusTool(body)),
      r('POST', '/api/tools/grade', false, ({ body }) => gradeTool(body)),
      r('POST', '/api/tools/four-run', false, ({ body }) => fourRunTool(body)),
      r('POST', '/api/tools/one-x-amplitude', false, ({ body }) =>
        oneXAmplitudeTool(body, this.view.latestWindow),
      ),
      r('GET', '/api/captures', false, () => ({
        captures: listCaptures(this.captureDir).reverse(),
      })),
      r('GET', '/api/captures/:cid/:ext', false, ({ params }) =>
        this.captureFile(params[0]!, params[1]!),
      ),
      r('GET', '/api/sweeps', false, () => ({
        sweeps: this.sweepStore().map(sweepSummary).reverse(),
      })),
      r('GET', '/api/sweeps/live', false, () => ({ sweep: this.opts.sweepLive?.() ?? null })),
      r('GET', '/api/sweeps/:sid', false, ({ params }) => this.sweep(params[0]!)),
    ];
  }

  private get captureDir(): string {
    return join(this.opts.config.state_dir, 'captures');
  }

  private captureFile(id: string, ext: string): FileReply {
    const type = CAPTURE_FILES[ext];
    if (!isCaptureId(id) || !type)
      throw new ApiError(
        404,
        'not_found',
        `no capture file ${id}.${ext}`,
        'GET /api/captures lists the captures; each has a .wav, .yaml and .json',
      );
    // Only captures whose record is written (complete) are served; the name is rebuilt from a
    // checked id.
    if (!listCaptures(this.captureDir).some((c) => c.id === id))
      throw new ApiError(
        404,
        'not_found',
        `no capture ${id} (removed to keep within capture.max_count / max_mb, or not yet complete)`,
        'GET /api/captures lists the captures there are',
      );
    return new FileReply(join(this.captureDir, `${id}.${ext}`), type, `${id}.${ext}`);
  }

  private sweepStore(): StoredSweep[] {
    const c = this.opts.config.sweep;
    const store = new SweepStore(this.opts.config.state_dir, {
      maxCount: c.max_count,
      maxBytes: c.max_mb * 2 ** 20,
      referenceId: c.reference_id,
    });
    return store
      .list()
      .map((e) => store.read(e.id))
      .filter((x): x is StoredSweep => x !== null);
  }

  private sweep(id: string): StoredSweep {
    const c = this.opts.config.sweep;
    const s = isSweepId(id)
      ? new SweepStore(this.opts.config.state_dir, {
          maxCount: c.max_count,
          maxBytes: c.max_mb * 2 ** 20,
        }).read(id)
      : null;
    if (!s)
      throw new ApiError(
        404,
        'not_found',
        `no sweep ${id}`,
        'GET /api/sweeps lists the recorded sweeps',
      );
    return s;
  }

  private async handle(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const remote = req.socket.remoteAddress ?? 'unknown';
    let path: string;
    try {
      path = new URL(req.url ?? '/', 'http://x').pathname;
    } catch {
      return this.reply(
        res,
        400,
        new ApiError(400, 'invalid_request', 'unreadable URL', 'check the address').body(),
      );
    }
    try {
      if (!path.startsWith('/api/')) return this.serveStatic(req, res, path);
      const route = this.routes.find((rt) => rt.pattern.test(path) && rt.method === req.method);
      if (!route) {
        const other = this.routes.some((rt) => rt.pattern.test(path));
        throw other
          ? new ApiError(
              405,
              'method_not_allowed',
              `${req.method} is not allowed on ${path}`,
              'see docs/live-page.md, "HTTP API", for the API',
            )
          : new ApiError(
              404,
              'not_found',
              `no API endpoint ${path}`,
              'see docs/live-page.md, "HTTP API", for the API',
            );
      }
      const principal = this.check.identify(bearerToken(req.headers.authorization));
      if (!principal) {
        this.refused(remote, path);
        res.setHeader('WWW-Authenticate', 'Bearer realm="turnwise"');
        throw new ApiError(
          401,
          'unauthorised',
          'missing or wrong token',
          'send the viewer or operator token as ' +
            '"Authorization: Bearer TOKEN" (the page asks for it)',
        );
      }
      if (route.act && !mayAct(principal)) {
        this.opts.logger.warn(
          { path, token: principal.name, role: principal.role, remote },
          'live page: action refused to a viewer token',
        );
        throw new ApiError(
          403,
          'forbidden',
          `the token of "${principal.name}" is a viewer token; ${path} changes a balancing job`,
          'use an operator token to run balancing jobs',
        );
      }
      const body = req.method === 'POST' ? await this.readBody(req) : undefined;
      const params = route.pattern.exec(path)!.slice(1);
      const result = await route.handler({ req, principal, params, body });
      if (route.act)
        this.opts.logger.debug(
          { path, token: principal.name, role: principal.role, remote },
          'live page: action done',
        );
      if (result instanceof FileReply) return this.sendFile(res, result);
      return this.reply(res, 200, result, route.download?.(params));
    } catch (e) {
      if (e instanceof ApiError) {
        if (e.status >= 500)
          this.opts.logger.error({ path, error: e.message }, 'live page: request failed');
        else if (req.method === 'POST' && e.status !== 401 && e.status !== 403)
          this.opts.logger.info(
            { path, code: e.code, error: e.message, remote },
            'live page: request refused',
          );
        return this.reply(res, e.status, e.body());
      }
      this.opts.logger.error(
        { path, error: (e as Error)?.stack ?? String(e) },
        'live page: internal error',
      );
      return this.reply(
        res,
        500,
        new ApiError(
          500,
          'internal',
          'internal error; the agent log has the details',
          'try again; if it repeats, report it with the agent log',
        ).body(),
      );
    }
  }

  private refused(remote: string, what: string): void {
    this.burst.report(
      `live-auth-${remote}`,
      'live page: request with a missing or wrong token refused',
      { remote, what },
    );
  }

  private readBody(req: IncomingMessage): Promise<unknown> {
    const type = (req.headers['content-type'] ?? '').split(';')[0]!.trim().toLowerCase();
    const length = Number(req.headers['content-length'] ?? 0);
    if (length > MAX_BODY_BYTES)
      return Promise.reject(
        new ApiError(
          413,
          'too_large',
          `the body is ${length} bytes; at most ${MAX_BODY_BYTES} are accepted`,
          'send a smaller request',
        ),
      );
    return new Promise((resolve, reject) => {
      const chunks: Buffer[] = [];
      let size = 0;
      req.on('data', (c: Buffer) => {
        size += c.length;
        if (size > MAX_BODY_BYTES) {
          reject(
            new ApiError(
              413,
              'too_large',
              `the body is over ${MAX_BODY_BYTES} bytes`,
              'send a smaller request',
            ),
          );
          req.destroy();
          return;
        }
        chunks.push(c);
      });
      req.on('error', reject);
      req.on('end', () => {
        if (size === 0) return resolve({});
        if (type !== 'application/json')
          return reject(
            new ApiError(
              415,
              'unsupported_media_type',
              `the body is "${type || 'of no stated type'}"`,
              'send JSON with Content-Type: application/json',
            ),
          );
        try {
          resolve(JSON.parse(Buffer.concat(chunks).toString('utf8')));
        } catch (e) {
          reject(
            new ApiError(
              400,
              'invalid_json',
              `the body is not valid JSON (${(e as Error).message})`,
              'send a JSON object',
            ),
          );
        }
      });
    });
  }

  private serveStatic(req: IncomingMessage, res: ServerResponse, path: string): void {
    const file = this.files?.get(path);
    if (req.method !== 'GET' && req.method !== 'HEAD')
      return this.reply(
        res,
        405,
        new ApiError(
          405,
          'method_not_allowed',
          `${req.method} is not allowed on ${path}`,
          'use GET',
        ).body(),
      );
    if (!file)
      return this.reply(
        res,
        404,
        new ApiError(404, 'not_found', `no page file ${path}`, 'open / for the live page').body(),
      );
    for (const [k, v] of Object.entries(SECURITY_HEADERS)) res.setHeader(k, v);
    res.setHeader('Cache-Control', 'no-cache');
    res.setHeader('ETag', file.etag);
    if (req.headers['if-none-match'] === file.etag) {
      res.writeHead(304).end();
      return;
    }
    res.writeHead(200, { 'Content-Type': file.type, 'Content-Length': file.body.length });
    res.end(req.method === 'HEAD' ? undefined : file.body);
  }

  private sendFile(res: ServerResponse, f: FileReply): void {
    let size: number;
    try {
      size = statSync(f.path).size;
    } catch {
      return this.reply(
        res,
        404,
        new ApiError(
          404,
          'not_found',
          `${f.filename} is gone (removed to keep within the capture bounds)`,
          'GET /api/captures lists the captures there are',
        ).body(),
      );
    }
    for (const [k, v] of Object.entries(SECURITY_HEADERS)) res.setHeader(k, v);
    res.writeHead(200, {
      'Content-Type': f.type,
      'Content-Length': size,
      'Cache-Control': 'no-store',
      'Content-Disposition': `attachment; filename="${f.filename}"`,
    });
    const stream = createReadStream(f.path);
    stream.on('error', () => res.destroy());
    stream.pipe(res);
  }

  private reply(res: ServerResponse, status: number, body: unknown, disposition?: string): void {
    if (res.headersSent) return;
    const text = JSON.stringify(body);
    for (const [k, v] of Object.entries(SECURITY_HEADERS)) res.setHeader(k, v);
    res.writeHead(status, {
      'Content-Type': 'application/json; charset=utf-8',
      'Content-Length': Buffer.byteLength(text),
      'Cache-Control': 'no-store',
      ...(disposition ? { 'Content-Disposition': disposition } : {}),
    });
    res.end(text);
  }
}
