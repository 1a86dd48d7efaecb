import protobuf from 'protobufjs';

/**
 * The Sparkplug B payload schema, written for this project after the Eclipse Sparkplug 3.0.0
 * specification, section 6.4 "Sparkplug B MQTT Payload Definition" (6.4.1 Google Protocol Buffer
 * Schema, 6.4.5 Payload, 6.4.6 Metric, 6.4.7 MetaData, 6.4.8 PropertySet, 6.4.9 PropertyValue,
 * 6.4.10 PropertySetList, 6.4.11-13 DataSet, 6.4.14-15 Template, 6.4.16 Data Types). Field numbers
 * and types are those of the schema file the specification points to (eclipse/tahu
 * sparkplug_b/sparkplug_b.proto); the extension ranges are left out (protobuf skips unknown
 * fields when decoding, and this node never writes extensions). Parsed by protobufjs, once per
 * codec.
 */
export const SPARKPLUG_B_PROTO = `
syntax = "proto2";
package turnwise.sparkplug_b;

message Payload {
  message Template {
    message Parameter {
      optional string name = 1;
      optional uint32 type = 2;
      oneof value {
        uint32 int_value = 3;
        uint64 long_value = 4;
        float float_value = 5;
        double double_value = 6;
        bool boolean_value = 7;
        string string_value = 8;
      }
    }
    optional string version = 1;
    repeated Metric metrics = 2;
    repeated Parameter parameters = 3;
    optional string template_ref = 4;
    optional bool is_definition = 5;
  }
  message DataSet {
    message DataSetValue {
      oneof value {
        uint32 int_value = 1;
        uint64 long_value = 2;
        float float_value = 3;
        double double_value = 4;
        bool boolean_value = 5;
        string string_value = 6;
      }
    }
    message Row {
      repeated DataSetValue elements = 1;
    }
    optional uint64 num_of_columns = 1;
    repeated string columns = 2;
    repeated uint32 types = 3;
    repeated Row rows = 4;
  }
  message PropertyValue {
    optional uint32 type = 1;
    optional bool is_null = 2;
    oneof value {
      uint32 int_value = 3;
      uint64 long_value = 4;
      float float_value = 5;
      double double_value = 6;
      bool boolean_value = 7;
      string string_value = 8;
      PropertySet propertyset_value = 9;
      PropertySetList propertysets_value = 10;
    }
  }
  message PropertySet {
    repeated string keys = 1;
    repeated PropertyValue values = 2;
  }
  message PropertySetList {
    repeated PropertySet propertyset = 1;
  }
  message MetaData {
    optional bool is_multi_part = 1;
    optional string content_type = 2;
    optional uint64 size = 3;
    optional uint64 seq = 4;
    optional string file_name = 5;
    optional string file_type = 6;
    optional string md5 = 7;
    optional string description = 8;
  }
  message Metric {
    optional string name = 1;
    optional uint64 alias = 2;
    optional uint64 timestamp = 3;
    optional uint32 datatype = 4;
    optional bool is_historical = 5;
    optional bool is_transient = 6;
    optional bool is_null = 7;
    optional MetaData metadata = 8;
    optional PropertySet properties = 9;
    oneof value {
      uint32 int_value = 10;
      uint64 long_value = 11;
      float float_value = 12;
      double double_value = 13;
      bool boolean_value = 14;
      string string_value = 15;
      bytes bytes_value = 16;
      DataSet dataset_value = 17;
      Template template_value = 18;
    }
  }
  optional uint64 timestamp = 1;
  repeated Metric metrics = 2;
  optional uint64 seq = 3;
  optional string uuid = 4;
  optional bytes body = 5;
}
`;

/**
 * Sparkplug 3.0.0 section 6.4.16 "Data Types": the numbers carried in Metric.datatype and
 * PropertyValue.type.
 */
export const DataType = {
  Unknown: 0,
  Int8: 1,
  Int16: 2,
  Int32: 3,
  Int64: 4,
  UInt8: 5,
  UInt16: 6,
  UInt32: 7,
  UInt64: 8,
  Float: 9,
  Double: 10,
  Boolean: 11,
  String: 12,
  DateTime: 13,
  Text: 14,
  UUID: 15,
  DataSet: 16,
  Bytes: 17,
  File: 18,
  Template: 19,
  PropertySet: 20,
  PropertySetList: 21,
} as const;
export type DataTypeName = keyof typeof DataType;

export interface PropertyValueMsg {
  type?: number;
  is_null?: boolean;
  int_value?: number;
  long_value?: number;
  double_value?: number;
  boolean_value?: boolean;
  string_value?: string;
}
export interface PropertySetMsg {
  keys: string[];
  values: PropertyValueMsg[];
}
export interface MetricMsg {
  name?: string;
  alias?: number;
  timestamp?: number;
  datatype?: number;
  is_historical?: boolean;
  is_transient?: boolean;
  is_null?: boolean;
  properties?: PropertySetMsg;
  int_value?: number;
  long_value?: number;
  float_value?: number;
  double_value?: number;
  boolean_value?: boolean;
  string_value?: string;
  bytes_value?: Uint8Array;
}
export interface PayloadMsg {
  timestamp?: number;
  metrics: MetricMsg[];
  seq?: number;
  uuid?: string;
  body?: Uint8Array;
}

/** Encoder and decoder of Sparkplug B payloads; build one per node (no module-level singleton). */
export class SparkplugCodec {
  private readonly type: protobuf.Type;

  constructor() {
    // keepCase: field names stay as the specification writes them (is_historical,
    // string_value ...).
    this.type = protobuf
      .parse(SPARKPLUG_B_PROTO, { keepCase: true })
      .root.lookupType('turnwise.sparkplug_b.Payload');
  }

  encode(p: PayloadMsg): Buffer {
    const problem = this.type.verify(p);
    if (problem) throw new Error(`Sparkplug payload does not fit the schema: ${problem}`);
    return Buffer.from(this.type.encode(this.type.fromObject(p)).finish());
  }

  /**
   * Decodes a payload; throws Error naming what is wrong for bytes that are not a Sparkplug B
   * payload.
   */
  decode(bytes: Uint8Array): PayloadMsg {
    const msg = this.type.decode(bytes);
    // longs as numbers (aliases, timestamps and seq fit well inside 2^53); oneofs keep only the set
    // field.
    return this.type.toObject(msg, {
      longs: Number,
      bytes: Buffer,
      defaults: false,
      arrays: true,
      oneofs: false,
    }) as PayloadMsg;
  }
}
