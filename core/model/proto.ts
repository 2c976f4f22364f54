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

const TYPE_NAMES: Record<number, string> = {
  1: 'float32', 2: 'uint8', 3: 'int8', 4: 'uint16', 5: 'int16', 6: 'int32', 7: 'int64', 8: 'string', 9: 'bool',
  10: 'float16', 11: 'float64', 12: 'uint32', 13: 'uint64', 14: 'complex64', 15: 'complex128', 16: 'bfloat16',
  17: 'float8e4m3fn', 18: 'float8e4m3fnuz', 19: 'float8e5m2', 20: 'float8e5m2fnuz', 21: 'uint4', 22: 'int4', 23: 'float4e2m1',
};

/** The ONNX TensorProto.DataType as a readable name (onnx.proto enum), e.g. 1 → 'float32'. */
export function elemTypeName(t: number | undefined): string {
  return t !== undefined && TYPE_NAMES[t] ? TYPE_NAMES[t] : `unknown type ${t ?? 'unset'}`;
}

/** Bits per element of each data type with a fixed size (onnx.proto; 4-bit types pack two per byte). */
export const ELEM_BITS: Record<number, number> = {
  1: 32, 2: 8, 3: 8, 4: 16, 5: 16, 6: 32, 7: 64, 9: 8, 10: 16, 11: 64, 12: 32, 13: 64, 14: 64, 15: 128, 16: 16,
  17: 8, 18: 8, 19: 8, 20: 8, 21: 4, 22: 4, 23: 4,
};

export const AttrType = { FLOAT: 1, INT: 2, STRING: 3, TENSOR: 4, GRAPH: 5, FLOATS: 6, INTS: 7, STRINGS: 8 } as const;

/** Decodes ModelProto bytes; throws protobufjs errors on malformed input (callers wrap them). */
export function decodeModelProto(bytes: Uint8Array): ModelProto {
  const msg = ModelProtoType.decode(bytes);
  return ModelProtoType.toObject(msg, { longs: Number, defaults: false, arrays: true }) as ModelProto;
}

export function encodeModelProto(model: ModelProto): Uint8Array {
  return ModelProtoType.encode(ModelProtoType.fromObject(model)).finish();
}
