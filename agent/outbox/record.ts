import { crc32 } from 'node:zlib';
import type { AgentEvent } from '../events.js';

/**
 * One outbox record = one file holding one event:
 *
 *   twob1 <crc32 of the JSON bytes, 8 hex digits> <JSON byte length>\n
 *   <the event as JSON, exactly the bytes that are published>\n
 *
 * The header makes a torn or damaged file detectable: a wrong magic, a length that does not match,
 * a checksum that does not match, JSON that does not parse, or an envelope without
 * id/type/severity.
 */
const MAGIC = 'twob1';
const SEVERITIES = new Set(['info', 'warning', 'alarm']);

export type Severity = AgentEvent['severity'];

export interface DecodedRecord {
  readonly id: string;
  readonly type: string;
  readonly severity: Severity;
  /** The JSON text to publish, unchanged. */
  readonly json: string;
}

export function encodeRecord(json: string): Buffer {
  const body = Buffer.from(json, 'utf8');
  const header = `${MAGIC} ${crc32(body).toString(16).padStart(8, '0')} ${body.length}\n`;
  return Buffer.concat([Buffer.from(header, 'ascii'), body, Buffer.from('\n', 'ascii')]);
}

/** Returns the record, or a sentence saying what is wrong with it. Never throws. */
export function decodeRecord(buf: Buffer): DecodedRecord | { readonly problem: string } {
  if (buf.length === 0)
    return { problem: 'empty file (a save was interrupted before any byte was written)' };
  const nl = buf.indexOf(0x0a);
  if (nl < 0 || nl > 64)
    return {
      problem: 'no record header (not an outbox record, or the start of the file is damaged)',
    };
  const parts = buf.subarray(0, nl).toString('ascii').split(' ');
  if (parts.length !== 3 || parts[0] !== MAGIC)
    return {
      problem: `unknown record header "${buf.subarray(0, nl).toString('ascii').slice(0, 40)}"`,
    };
  const crc = Number.parseInt(parts[1]!, 16);
  const len = Number(parts[2]);
  if (!/^[0-9a-f]{8}$/.test(parts[1]!) || !Number.isSafeInteger(len) || len < 0)
    return { problem: 'record header is damaged' };
  const body = buf.subarray(nl + 1, nl + 1 + len);
  if (body.length < len)
    return {
      problem: `record is cut short: ${body.length} of ${len} bytes (a save was interrupted)`,
    };
  if (buf.length !== nl + 1 + len + 1 || buf[nl + 1 + len] !== 0x0a)
    return { problem: `record has ${buf.length - (nl + 2 + len)} unexpected trailing byte(s)` };
  if (crc32(body) !== crc)
    return { problem: 'checksum mismatch (the event bytes were damaged on disk)' };
  const json = body.toString('utf8');
  let ev: unknown;
  try {
    ev = JSON.parse(json);
  } catch {
    return { problem: 'checksum matches but the event is not valid JSON' };
  }
  const e = ev as Partial<Record<'id' | 'type' | 'severity', unknown>> | null;
  if (
    !e ||
    typeof e !== 'object' ||
    typeof e.id !== 'string' ||
    typeof e.type !== 'string' ||
    typeof e.severity !== 'string' ||
    !SEVERITIES.has(e.severity)
  ) {
    return { problem: 'event lacks a string id, type or a known severity' };
  }
  return { id: e.id, type: e.type, severity: e.severity as Severity, json };
}
