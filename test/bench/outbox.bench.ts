/**
 * Outbox cost on this machine: time from add() to "on disk" (write + fsync + rename + directory
 * fsync) per event, and the cost of the acknowledgement (unlink). Run after a build:
 *   node dist/test/bench/outbox.bench.js [DIR] (DIR: a directory on the disk to measure; default
 *   the temp dir)
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Outbox } from '../../agent/outbox/outbox.js';

const N = 300;
const root = mkdtempSync(join(process.argv[2] ?? tmpdir(), 'tw-bench-'));
const ob = await Outbox.open({ dir: join(root, 'outbox'), maxEvents: 10 * N });
const event = (i: number) => ({
  id: `bench-${i}`,
  ts: new Date().toISOString(),
  asset: 'kessrow-id3a',
  type: 'zone_change',
  severity: 'warning' as const,
  channel: 'DE-V',
  zone: 'C',
  overall_rms_mm_s: 4.71,
  text: 'x'.repeat(300),
});

const lat: number[] = [];
let t0 = process.hrtime.bigint();
for (let i = 0; i < N; i++) {
  const s = process.hrtime.bigint();
  await ob.add(event(i));
  lat.push(Number(process.hrtime.bigint() - s) / 1e6);
}
const serialMs = Number(process.hrtime.bigint() - t0) / 1e6;

t0 = process.hrtime.bigint();
await Promise.all(Array.from({ length: N }, (_, i) => ob.add(event(N + i))));
const burstMs = Number(process.hrtime.bigint() - t0) / 1e6;

t0 = process.hrtime.bigint();
for (const e of [...ob.sendable()]) ob.ack(e.seq);
await ob.settled();
const ackMs = Number(process.hrtime.bigint() - t0) / 1e6;
await ob.close();
rmSync(root, { recursive: true, force: true });

lat.sort((a, b) => a - b);
const q = (p: number) => lat[Math.min(lat.length - 1, Math.floor(p * lat.length))]!.toFixed(2);
process.stdout.write(
  `outbox on ${process.argv[2] ?? tmpdir()}, ${N} events ` +
    `of ~${JSON.stringify(event(0)).length} bytes\n` +
    `  add -> durable, one at a time: median ${q(0.5)} ms, p99 ` +
    `${q(0.99)} ms, ${(N / (serialMs / 1000)).toFixed(0)} events/s\n` +
    `  add -> durable, burst of ${N}:  ${(burstMs / N).toFixed(2)} ms ` +
    `per event, ${(N / (burstMs / 1000)).toFixed(0)} events/s\n` +
    `  ack (unlink) of ${2 * N}:         ${((ackMs / (2 * N)) * 1000).toFixed(0)} us per event\n`,
);
