import { connect, createServer, type Server, type Socket } from 'node:net';

/**
 * A loopback TCP proxy in front of the broker. With `holdReplies` set, bytes from the broker to the
 * client are swallowed: the client's messages still reach the broker, but it never sees a PUBACK —
 * the window between "published" and "acknowledged" held open for as long as a test needs.
 */
export class HoldingProxy {
  holdReplies = false;
  private readonly sockets = new Set<Socket>();
  private constructor(
    private readonly server: Server,
    readonly port: number,
  ) {}

  static start(targetPort: number): Promise<HoldingProxy> {
    return new Promise((resolve) => {
      let proxy: HoldingProxy;
      const server = createServer((client) => {
        const upstream = connect({ port: targetPort, host: '127.0.0.1' });
        proxy.sockets.add(client).add(upstream);
        client.on('data', (d) => upstream.write(d));
        upstream.on('data', (d) => {
          if (!proxy.holdReplies) client.write(d);
        });
        const end = () => {
          client.destroy();
          upstream.destroy();
        };
        client.on('close', end).on('error', end);
        upstream.on('close', end).on('error', end);
      });
      server.listen(0, '127.0.0.1', () => {
        const a = server.address();
        proxy = new HoldingProxy(server, a && typeof a === 'object' ? a.port : 0);
        resolve(proxy);
      });
    });
  }

  get url(): string {
    return `mqtt://127.0.0.1:${this.port}`;
  }

  close(): Promise<void> {
    for (const s of this.sockets) s.destroy();
    return new Promise((r) => this.server.close(() => r()));
  }
}
