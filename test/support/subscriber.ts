import { connect, type IClientOptions, type MqttClient } from 'mqtt';

export interface Received {
  readonly topic: string;
  readonly payload: Buffer;
  readonly retain: boolean;
  readonly json: unknown;
}

/**
 * A plain MQTT client standing in for the plant side. With `sessionId` it keeps a persistent
 * session (clean: false, QoS 1), so the broker queues messages for it while it is disconnected,
 * including across a graceful broker restart.
 */
export class TestSubscriber {
  readonly messages: Received[] = [];
  private constructor(readonly client: MqttClient) {
    client.on('message', (topic, payload, packet) => {
      let json: unknown = undefined;
      try {
        json = JSON.parse(payload.toString('utf8'));
      } catch {
        /* not JSON: kept as bytes */
      }
      this.messages.push({ topic, payload, retain: packet.retain, json });
    });
  }

  static async open(
    url: string,
    filters: string[],
    opts: { sessionId?: string; extra?: IClientOptions } = {},
  ): Promise<TestSubscriber> {
    const client = connect(url, {
      clientId: opts.sessionId ?? `tw-test-sub-${Math.random().toString(16).slice(2)}`,
      clean: !opts.sessionId,
      reconnectPeriod: 100,
      connectTimeout: 5000,
      ...opts.extra,
    });
    client.on('error', () => {});
    const sub = new TestSubscriber(client);
    await new Promise<void>((resolve, reject) => {
      const t = setTimeout(
        () => reject(new Error(`test subscriber could not connect to ${url}`)),
        10_000,
      );
      client.once('connect', () => {
        clearTimeout(t);
        client.subscribe(filters, { qos: 1 }, (err) => (err ? reject(err) : resolve()));
      });
    });
    return sub;
  }

  on(topic: string): Received[] {
    return this.messages.filter((m) => m.topic === topic);
  }

  /** Waits until `pred` holds over the messages so far. */
  async waitFor(
    pred: (msgs: Received[]) => boolean,
    timeoutMs = 15_000,
    what = 'expected messages',
  ): Promise<void> {
    const until = Date.now() + timeoutMs;
    while (!pred(this.messages)) {
      if (Date.now() > until)
        throw new Error(
          `timed out after ${timeoutMs} ms waiting for ${what}; got ${this.messages.length} message(s): ${this.messages
            .map((m) => m.topic)
            .slice(-10)
            .join(', ')}`,
        );
      await new Promise((r) => setTimeout(r, 25));
    }
  }

  publish(topic: string, payload: string | Buffer): Promise<void> {
    return new Promise((resolve, reject) =>
      this.client.publish(topic, payload, { qos: 1 }, (e) => (e ? reject(e) : resolve())),
    );
  }

  close(): Promise<void> {
    return new Promise((resolve) => this.client.end(true, {}, () => resolve()));
  }
}
