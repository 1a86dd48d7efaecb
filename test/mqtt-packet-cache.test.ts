import { createRequire } from 'node:module';
import { dirname, sep } from 'node:path';
import { describe, expect, it } from 'vitest';
import { mqttSchema } from '../agent/config/mqtt.js';
import { openPlantLink } from '../agent/mqtt/plant-link.js';
import {
  CACHED_LENGTHS,
  mqttPacketWriter,
  settleMqttPacketCaches,
  writePublishOfLength,
  type PacketWriter,
} from '../agent/mqtt/packet-cache.js';
import type { ConnectFn } from '../agent/mqtt/publisher.js';
import { CaptureLog } from './support/capture-log.js';
import { testResources } from './support/harness.js';

/**
 * mqtt-packet's remaining-length cache over a long run: the pool blocks its entries keep alive must
 * stay bounded however many new packet lengths the agent meets (docs/evidence.md: soak).
 */

const res = testResources('tw-packet-cache-');
const fromMqtt = createRequire(createRequire(import.meta.url).resolve('mqtt'));

/**
 * A new mqtt-packet instance with empty caches; the one mqtt.js uses stays in the require cache.
 */
function freshWriter(): PacketWriter {
  const dir = dirname(fromMqtt.resolve('mqtt-packet')) + sep;
  const ours = () => Object.keys(fromMqtt.cache).filter((k) => k.startsWith(dir));
  const saved = ours().map((k) => [k, fromMqtt.cache[k]!] as const);
  for (const k of ours()) delete fromMqtt.cache[k];
  try {
    return (fromMqtt('mqtt-packet') as { writeToStream: PacketWriter }).writeToStream;
  } finally {
    for (const k of ours()) delete fromMqtt.cache[k];
    for (const [k, m] of saved) fromMqtt.cache[k] = m;
  }
}

const payload = Buffer.alloc(CACHED_LENGTHS + 10); // un-pooled

/**
 * Writes a publish of remaining length `len` and returns the chunk holding the remaining length
 * (the second one written).
 */
function lengthField(write: PacketWriter, len: number): Buffer {
  const chunks: unknown[] = [];
  const sink = {
    write: (c: unknown) => chunks.push(c) > 0,
    destroy: (e: Error) => {
      throw e;
    },
  };
  writePublishOfLength(write, len, sink, payload);
  return chunks[1] as Buffer;
}

/**
 * A long run in miniature: `lengths` new packet lengths met one at a time, the rest of the process
 * taking a pool block's worth from the Buffer pool in between (in the agent, the messages and file
 * writes of the minutes between two new lengths take far more). Returns the pool
 * blocks (ArrayBuffers) the cached remaining-length fields sit in: the cache keeps each alive.
 */
function longRun(write: PacketWriter, lengths: readonly number[]): Set<ArrayBufferLike> {
  const blocks = new Set<ArrayBufferLike>();
  const other: Buffer[] = [];
  for (const len of lengths) {
    other.push(Buffer.allocUnsafe(4000), Buffer.allocUnsafe(4000));
    if (other.length > 20) other.splice(0, 2);
    blocks.add(lengthField(write, len).buffer);
  }
  return blocks;
}

/**
 * 400 distinct lengths in the range of the demo fan's live and event messages (360-1342 bytes in
 * the soak).
 */
const soakLengths = Array.from({ length: 400 }, (_, i) => 1000 + ((i * 7) % 400));
/** And 2000 more spread over every cached length. */
const allLengths = [
  ...soakLengths,
  ...Array.from({ length: 2000 }, (_, i) => 3 + ((i * 8191) % (CACHED_LENGTHS - 3))),
];
const POOL_BLOCK = Buffer.poolSize;

describe('mqtt-packet caches', () => {
  it('without the fill, every new length pins another pool block (the growth the soak showed)', () => {
    // Control: if this fails after an mqtt-packet upgrade, the library no longer caches pool slices
    // and the fill may go.
    const blocks = longRun(freshWriter(), soakLengths);
    expect(blocks.size).toBeGreaterThan(300);
    expect(blocks.size * POOL_BLOCK).toBeGreaterThan(2.4 * 2 ** 20);
  });

  it('after the fill, no new length pins anything: the blocks stay those of the fill', () => {
    const write = freshWriter();
    expect(settleMqttPacketCaches(write)).toBe(CACHED_LENGTHS - 3);
    expect(write.cacheNumbers).toBe(false);
    const filled = new Set<ArrayBufferLike>();
    for (let len = 3; len < CACHED_LENGTHS; len++) filled.add(lengthField(write, len).buffer);
    // 8-byte aligned 4-byte entries and one 2-byte topic length each: 16 bytes a length, 32 blocks
    // of 8 KiB (+1 partly used before).
    expect(filled.size).toBeLessThanOrEqual(33);
    const blocks = longRun(write, allLengths);
    for (const b of blocks) expect(filled.has(b)).toBe(true);
  });

  it('keeps the remaining length encoded as the standard says', () => {
    // OASIS MQTT 3.1.1, section 2.2.3, Table 2.4: 0-127 in one byte, 128 = 0x80 0x01, 16383 = 0xFF
    // 0x7F.
    const write = freshWriter();
    settleMqttPacketCaches(write);
    expect([...lengthField(write, 3)]).toEqual([0x03]);
    expect([...lengthField(write, 127)]).toEqual([0x7f]);
    expect([...lengthField(write, 128)]).toEqual([0x80, 0x01]);
    expect([...lengthField(write, 321)]).toEqual([0xc1, 0x02]);
    expect([...lengthField(write, 16383)]).toEqual([0xff, 0x7f]);
    // Not cached (16384 and up): encoded afresh, three bytes from 16384 = 0x80 0x80 0x01.
    expect([...lengthField(write, 16384)]).toEqual([0x80, 0x80, 0x01]);
  });

  it('the publisher settles the instance mqtt.js writes with before its first connection, and asks for no number cache', async () => {
    const real = mqttPacketWriter();
    expect(real).toBe((fromMqtt('mqtt-packet') as { writeToStream: PacketWriter }).writeToStream);
    let asked: Parameters<ConnectFn>[1] | null = null;
    const connect: ConnectFn = (_url, opts) => {
      asked = opts;
      throw new Error('no broker in this test');
    };
    const l = await openPlantLink({
      mqtt: mqttSchema.parse({ url: 'mqtt://127.0.0.1:1', topic_prefix: 'pc' }),
      asset: 'kessrow-id3a', // invented demo fan (config/example.yaml)
      stateDir: res.tmpDir(),
      log: new CaptureLog(),
      connect,
    });
    res.defer(() => l.close());
    expect(asked).not.toBeNull();
    expect(asked!.writeCache).toBe(false);
    expect(real.cacheNumbers).toBe(false);
    // Filled at start: the long run finds every length and pins nothing (without the fill it pins
    // hundreds of blocks).
    expect(longRun(real, allLengths).size).toBeLessThanOrEqual(33);
  });
});
