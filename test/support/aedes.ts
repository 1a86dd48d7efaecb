import { createServer } from 'node:net';
import { Aedes } from 'aedes';

/**
 * An aedes broker (Node, MQTT 3.1.1 only) on 127.0.0.1: the broker that refuses MQTT 5, for the
 * protocol-level fallback, and the bench's in-process broker. `port` 0 takes any free port.
 */
export async function aedesBroker(port = 0): Promise<{ url: string; close(): Promise<void> }> {
  const aedes = await Aedes.createBroker();
  const server = createServer(aedes.handle);
  await new Promise<void>((r) => server.listen(port, '127.0.0.1', () => r()));
  const p = (server.address() as { port: number }).port;
  return {
    url: `mqtt://127.0.0.1:${p}`,
    close: async () => {
      await new Promise<void>((r) => aedes.close(() => r()));
      await new Promise<void>((r) => server.close(() => r()));
    },
  };
}
