import { createRequire } from 'node:module';

/**
 * Keeps the MQTT encoder's caches from costing memory over a long run.
 *
 * mqtt-packet (the encoder under mqtt.js, 9.0.x) keeps two process-wide caches:
 *
 * - 65536 two-byte Buffers for every 16-bit number (topic lengths, packet ids), built on the first
 *   packet: about 6.5 MB of heap and 10 MB of RSS measured on Node 20. mqtt.js's `writeCache:
 *   false` turns it off (the publisher passes it); it is also switched off here before anything is
 *   written, so the fill below does not build it. A few 2-byte allocations per packet instead cost
 *   nothing at a few messages a second.
 * - the 1-4 byte "remaining length" of every packet length below 16384, cached the first time a
 *   packet of that length is written. Each entry is a Buffer.allocUnsafe slice of Node's shared
 *   8 KiB Buffer pool, and a slice keeps its whole pool block alive: met one at a time over days (a
 *   live message a little longer than any before), each new length pins another 8 KiB. The 7-day
 *   soak went from 8 to 44 pinned blocks; the limit is 16384 blocks (128 MiB).
 *
 * Writing a publish of every length from 3 to 16383 once, back to back, before the first real
 * packet fills that cache while nothing else takes from the pool: its entries pack into 32 pool
 * blocks (256 KiB, plus about 1.9 MB of Buffer objects on the heap) and no later length adds any.
 * Lengths 0-2 (acknowledgements) can pin at most 3 more blocks. Harmless when run again (every
 * length is then found) or with a later mqtt-packet that no longer caches this way.
 */

interface PacketSink {
  write(chunk: unknown): boolean;
  destroy(e: Error): void;
}

/** mqtt-packet's writeToStream, the part used here. */
export interface PacketWriter {
  (
    packet: { cmd: 'publish'; topic: string; payload: Buffer; qos: 0; dup: false; retain: false },
    stream: PacketSink,
  ): boolean;
  cacheNumbers: boolean;
}

/** mqtt-packet caches the remaining lengths below this. */
export const CACHED_LENGTHS = 16384;
/** Smallest remaining length of a publish: topic length (2 bytes) and a 1-byte topic. */
const MIN_PUBLISH = 3;

/** mqtt-packet's writeToStream, the same module instance mqtt.js writes with. */
export function mqttPacketWriter(): PacketWriter {
  const fromMqtt = createRequire(createRequire(import.meta.url).resolve('mqtt'));
  return (fromMqtt('mqtt-packet') as { writeToStream: PacketWriter }).writeToStream;
}

/** Writes a QoS 0 publish with remaining length `len` (3 or more) to `sink`. */
export function writePublishOfLength(
  write: PacketWriter,
  len: number,
  sink: PacketSink,
  payload = Buffer.alloc(len - MIN_PUBLISH),
): boolean {
  return write(
    {
      cmd: 'publish',
      topic: 'x',
      payload: payload.subarray(0, len - MIN_PUBLISH),
      qos: 0,
      dup: false,
      retain: false,
    },
    sink,
  );
}

/**
 * Turns the number cache off and fills the remaining-length cache for every publish length (see
 * above); returns the lengths written.
 */
export function settleMqttPacketCaches(write: PacketWriter = mqttPacketWriter()): number {
  write.cacheNumbers = false;
  // One un-pooled payload (larger than half the pool), viewed at every length: nothing else takes
  // from the pool.
  const payload = Buffer.alloc(CACHED_LENGTHS);
  const sink: PacketSink = {
    write: () => true,
    destroy: (e) => {
      throw e;
    },
  };
  let n = 0;
  for (let len = MIN_PUBLISH; len < CACHED_LENGTHS; len++, n++)
    writePublishOfLength(write, len, sink, payload);
  return n;
}
