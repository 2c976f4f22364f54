/**
 * ONNX protobuf access. The schema is the official onnx.proto (Apache-2.0, from the onnx
 * Python package), converted once to JSON by scripts/gen-onnx-schema.mjs, so no code
 * generation step runs at install time.
 */
import * as protobuf from 'protobufjs';
import schema from './schema/onnx-schema.json';

const root = protobuf.Root.fromJSON(schema as protobuf.INamespace);
const ModelProtoType = root.lookupType('onnx.ModelProto');

/** The subset of onnx.proto we read and write, as plain objects (int64 as number). */
export interface TensorProto {
  dims?: number[];
  data_type?: number;
  float_data?: number[];
  int32_data?: number[];
  int64_data?: number[];
  double_data?: number[];
  uint64_data?: number[];
  raw_data?: Uint8Array;
  name?: string;
  data_location?: number;
  external_data?: { key?: string; value?: string }[];
  [k: string]: unknown;
}
export interface AttributeProto {
  name?: string;
  type?: number;
  f?: number;
  i?: number;
  s?: Uint8Array;
  t?: TensorProto;
  g?: GraphProto;
  floats?: number[];
  ints?: number[];
  strings?: Uint8Array[];
  [k: string]: unknown;
}
export interface NodeProto {
  input?: string[];
  output?: string[];
  name?: string;
  op_type?: string;
  domain?: string;
  attribute?: AttributeProto[];
  [k: string]: unknown;
}
export interface TensorShapeDim { dim_value?: number; dim_param?: string }
export interface ValueInfoProto {
  name?: string;
  type?: { tensor_type?: { elem_type?: number; shape?: { dim?: TensorShapeDim[] } } };
  [k: string]: unknown;
}
export interface GraphProto {
  node?: NodeProto[];
  name?: string;
  initializer?: TensorProto[];
  input?: ValueInfoProto[];
  output?: ValueInfoProto[];
  value_info?: ValueInfoProto[];
  [k: string]: unknown;
}
export interface ModelProto {
  ir_version?: number;
  opset_import?: { domain?: string; version?: number }[];
  producer_name?: string;
  producer_version?: string;
  graph?: GraphProto;
  metadata_props?: { key?: string; value?: string }[];
  [k: string]: unknown;
}

export const TensorType = {
  FLOAT: 1, UINT8: 2, INT8: 3, UINT16: 4, INT16: 5, INT32: 6, INT64: 7, STRING: 8, BOOL: 9,
  FLOAT16: 10, DOUBLE: 11, UINT32: 12, UINT64: 13, BFLOAT16: 16,
} as const;

export const AttrType = { FLOAT: 1, INT: 2, STRING: 3, TENSOR: 4, GRAPH: 5, FLOATS: 6, INTS: 7, STRINGS: 8 } as const;

/** Decodes ModelProto bytes; throws protobufjs errors on malformed input (callers wrap them). */
export function decodeModelProto(bytes: Uint8Array): ModelProto {
  const msg = ModelProtoType.decode(bytes);
  return ModelProtoType.toObject(msg, { longs: Number, defaults: false, arrays: true }) as ModelProto;
}

export function encodeModelProto(model: ModelProto): Uint8Array {
  return ModelProtoType.encode(ModelProtoType.fromObject(model)).finish();
}
