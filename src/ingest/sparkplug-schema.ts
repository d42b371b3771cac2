import protobuf from 'protobufjs';

/**
 * The Sparkplug B payload schema, written out from the Google Protocol Buffers schema that the
 * Sparkplug specification publishes for the Sparkplug B payload (Eclipse Sparkplug Specification,
 * version 3.0.0, chapter "Payloads", section "Google Protocol Buffer Schema"; the specification is
 * also ISO/IEC 20237:2023). The Eclipse Tahu project publishes the same schema as
 * sparkplug_b/sparkplug_b.proto (EPL-2.0). Field numbers, types and nesting are the
 * specification's; they are what makes a payload interoperable. It is kept here as text (parsed once
 * by protobufjs at start) so that the built daemon needs no data file beside its code.
 *
 * Data type codes of `datatype` (the specification's table of Sparkplug data types): 1 Int8,
 * 2 Int16, 3 Int32, 4 Int64, 5 UInt8, 6 UInt16, 7 UInt32, 8 UInt64, 9 Float, 10 Double, 11 Boolean,
 * 12 String, 13 DateTime, 14 Text, 15 UUID, 16 DataSet, 17 Bytes, 18 File, 19 Template,
 * 20 PropertySet, 21 PropertySetList (0 Unknown).
 */
export const SPARKPLUG_B_PROTO = `
syntax = "proto2";
package org.eclipse.tahu.protobuf;

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
        ParameterValueExtension extension_value = 9;
      }
      message ParameterValueExtension {
        extensions 1 to max;
      }
    }
    optional string version = 1;
    repeated Metric metrics = 2;
    repeated Parameter parameters = 3;
    optional string template_ref = 4;
    optional bool is_definition = 5;
    extensions 6 to max;
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
        DataSetValueExtension extension_value = 7;
      }
      message DataSetValueExtension {
        extensions 1 to max;
      }
    }
    message Row {
      repeated DataSetValue elements = 1;
      extensions 2 to max;
    }
    optional uint64 num_of_columns = 1;
    repeated string columns = 2;
    repeated uint32 types = 3;
    repeated Row rows = 4;
    extensions 5 to max;
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
      PropertyValueExtension extension_value = 11;
    }
    message PropertyValueExtension {
      extensions 1 to max;
    }
  }

  message PropertySet {
    repeated string keys = 1;
    repeated PropertyValue values = 2;
    extensions 3 to max;
  }

  message PropertySetList {
    repeated PropertySet propertyset = 1;
    extensions 2 to max;
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
    extensions 9 to max;
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
      MetricValueExtension extension_value = 19;
    }
    message MetricValueExtension {
      extensions 1 to max;
    }
  }

  optional uint64 timestamp = 1;
  repeated Metric metrics = 2;
  optional uint64 seq = 3;
  optional string uuid = 4;
  optional bytes body = 5;
  extensions 6 to max;
}
`;

/** The Payload message type, parsed once. */
export const SparkplugPayload: protobuf.Type = protobuf.parse(SPARKPLUG_B_PROTO, { keepCase: true }).root.lookupType('org.eclipse.tahu.protobuf.Payload');

export const SPARKPLUG_TYPES = {
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
} as const;

export const SPARKPLUG_TYPE_NAMES = ['Unknown', 'Int8', 'Int16', 'Int32', 'Int64', 'UInt8', 'UInt16', 'UInt32', 'UInt64', 'Float', 'Double', 'Boolean', 'String', 'DateTime', 'Text', 'UUID', 'DataSet', 'Bytes', 'File', 'Template', 'PropertySet', 'PropertySetList'];

/** The metric a rebirth request carries on NCMD (the specification's "Node Control/Rebirth", Boolean true). */
export const REBIRTH_METRIC = 'Node Control/Rebirth';
