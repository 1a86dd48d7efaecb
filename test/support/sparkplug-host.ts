import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { connect, type MqttClient } from 'mqtt';

/**
 * The host side of the Sparkplug tests, independent of the agent's own code:
 * - a plain mqtt.js subscriber that records every message on spBv1.0/# with the QoS and retain
 *   flag the broker delivered it with (subscribed at QoS 1, so QoS 0 on arrival means it was
 *   published at QoS 0);
 * - a decoder and encoder in Python with Debian's python3-protobuf, from a .proto written here
 *   (below) from the Eclipse Sparkplug 3.0.0 specification, section 6.4 (Payload, Metric,
 *   PropertySet, PropertyValue ...), compiled with protoc. It shares nothing with
 *   agent/mqtt/sparkplug/proto.ts or protobufjs.
 */

export const PYTHON = existsSync('/usr/bin/python3') ? '/usr/bin/python3' : 'python3';

/**
 * Written for the tests from the specification's section 6.4; a different package and layout from
 * the agent's copy on purpose.
 */
const HOST_PROTO = `syntax = "proto2";
package hostcheck;

message SpPayload {
  optional uint64 timestamp = 1;
  repeated SpMetric metrics = 2;
  optional uint64 seq = 3;
  optional string uuid = 4;
  optional bytes body = 5;
}
message SpPropertyValue {
  optional uint32 type = 1;
  optional bool is_null = 2;
  oneof value {
    uint32 int_value = 3;
    uint64 long_value = 4;
    float float_value = 5;
    double double_value = 6;
    bool boolean_value = 7;
    string string_value = 8;
    SpPropertySet propertyset_value = 9;
    SpPropertySetList propertysets_value = 10;
  }
}
message SpPropertySet {
  repeated string keys = 1;
  repeated SpPropertyValue values = 2;
}
message SpPropertySetList {
  repeated SpPropertySet propertyset = 1;
}
message SpMetaData {
  optional bool is_multi_part = 1;
  optional string content_type = 2;
  optional uint64 size = 3;
  optional uint64 seq = 4;
  optional string file_name = 5;
  optional string file_type = 6;
  optional string md5 = 7;
  optional string description = 8;
}
message SpMetric {
  optional string name = 1;
  optional uint64 alias = 2;
  optional uint64 timestamp = 3;
  optional uint32 datatype = 4;
  optional bool is_historical = 5;
  optional bool is_transient = 6;
  optional bool is_null = 7;
  optional SpMetaData metadata = 8;
  optional SpPropertySet properties = 9;
  oneof value {
    uint32 int_value = 10;
    uint64 long_value = 11;
    float float_value = 12;
    double double_value = 13;
    bool boolean_value = 14;
    string string_value = 15;
    bytes bytes_value = 16;
  }
}
`;

const HOST_PY = `
import json, sys
sys.path.insert(0, sys.argv[1])
import host_pb2

def todict(msg):
    out = {}
    for f, v in msg.ListFields():
        rep = f.label == f.LABEL_REPEATED
        if f.type == f.TYPE_MESSAGE:
            out[f.name] = [todict(x) for x in v] if rep else todict(v)
        elif f.type == f.TYPE_BYTES:
            out[f.name] = v.hex()
        else:
            out[f.name] = list(v) if rep else v
    return out

mode = sys.argv[2]
data = json.load(sys.stdin)
if mode == 'decode':
    res = []
    for m in data:
        p = host_pb2.SpPayload()
        try:
            p.ParseFromString(bytes.fromhex(m['hex']))
            res.append({'topic': m['topic'], 'qos': m['qos'], 'retain': m['retain'], 'payload': todict(p)})
        except Exception as e:
            res.append({'topic': m['topic'], 'qos': m['qos'], 'retain': m['retain'], 'error': str(e)})
    json.dump(res, sys.stdout)
else:
    p = host_pb2.SpPayload()
    p.timestamp = data['timestamp']
    for spec in data['metrics']:
        m = p.metrics.add()
        for k, v in spec.items():
            setattr(m, k, v)
    sys.stdout.write(p.SerializeToString().hex())
`;

export interface HostMessage {
  readonly topic: string;
  readonly qos: number;
  readonly retain: boolean;
  readonly payload?: HostPayload;
  readonly error?: string;
}
export interface HostMetric {
  readonly name?: string;
  readonly alias?: number;
  readonly timestamp?: number;
  readonly datatype?: number;
  readonly is_historical?: boolean;
  readonly is_null?: boolean;
  readonly properties?: { keys: string[]; values: Array<{ type?: number; string_value?: string }> };
  readonly long_value?: number;
  readonly double_value?: number;
  readonly boolean_value?: boolean;
  readonly string_value?: string;
}
export interface HostPayload {
  readonly timestamp?: number;
  readonly seq?: number;
  readonly metrics?: HostMetric[];
}

export class PythonSparkplug {
  private constructor(readonly dir: string) {}

  static build(): PythonSparkplug {
    const dir = mkdtempSync(join(tmpdir(), 'tw-sphost-'));
    writeFileSync(join(dir, 'host.proto'), HOST_PROTO);
    writeFileSync(join(dir, 'host.py'), HOST_PY);
    execFileSync('protoc', [`--proto_path=${dir}`, `--python_out=${dir}`, join(dir, 'host.proto')]);
    return new PythonSparkplug(dir);
  }

  decode(
    msgs: ReadonlyArray<{ topic: string; qos: number; retain: boolean; payload: Buffer }>,
  ): HostMessage[] {
    const input = JSON.stringify(
      msgs.map((m) => ({
        topic: m.topic,
        qos: m.qos,
        retain: m.retain,
        hex: m.payload.toString('hex'),
      })),
    );
    const out = execFileSync(PYTHON, [join(this.dir, 'host.py'), this.dir, 'decode'], {
      input,
      maxBuffer: 64 * 1024 * 1024,
    });
    return JSON.parse(out.toString('utf8')) as HostMessage[];
  }

  /** A host's NCMD/DCMD payload, encoded by python3-protobuf. */
  encode(p: {
    timestamp: number;
    metrics: Array<Record<string, string | number | boolean>>;
  }): Buffer {
    const out = execFileSync(PYTHON, [join(this.dir, 'host.py'), this.dir, 'encode'], {
      input: JSON.stringify(p),
    });
    return Buffer.from(out.toString('utf8'), 'hex');
  }

  dispose(): void {
    rmSync(this.dir, { recursive: true, force: true });
  }
}

export interface Recorded {
  readonly topic: string;
  readonly qos: number;
  readonly retain: boolean;
  readonly payload: Buffer;
  readonly at: number;
}

/** Records every message on the filters with its delivered QoS and retain flag. */
export class HostRecorder {
  readonly messages: Recorded[] = [];
  private constructor(readonly client: MqttClient) {
    client.on('message', (topic, payload, packet) =>
      this.messages.push({
        topic,
        qos: packet.qos,
        retain: packet.retain,
        payload: Buffer.from(payload),
        at: Date.now(),
      }),
    );
  }

  static async open(url: string, filters: string[]): Promise<HostRecorder> {
    const client = connect(url, {
      clientId: `tw-sphost-${Math.random().toString(16).slice(2)}`,
      clean: true,
      reconnectPeriod: 200,
      connectTimeout: 5000,
    });
    client.on('error', () => {});
    const r = new HostRecorder(client);
    await new Promise<void>((resolve, reject) => {
      const t = setTimeout(
        () => reject(new Error(`host recorder could not connect to ${url}`)),
        10_000,
      );
      client.once('connect', () => {
        clearTimeout(t);
        client.subscribe(filters, { qos: 1 }, (err) => (err ? reject(err) : resolve()));
      });
    });
    return r;
  }

  count(kind: string): number {
    return this.messages.filter((m) => m.topic.split('/')[2] === kind).length;
  }

  publish(topic: string, payload: string | Buffer, retain = false): Promise<void> {
    return new Promise((resolve, reject) =>
      this.client.publish(topic, payload, { qos: 1, retain }, (e) => (e ? reject(e) : resolve())),
    );
  }

  close(): Promise<void> {
    return new Promise((resolve) => this.client.end(true, {}, () => resolve()));
  }
}
