/** Reading TensorProto payloads into typed arrays, and building small constant tensors. */
import { TensorProto, TensorType } from './proto';

export type NumericArray = Float32Array | Float64Array | BigInt64Array | Int32Array | Uint8Array;

export function tensorElementCount(t: TensorProto): number {
  return (t.dims ?? []).reduce((a, b) => a * b, 1);
}

/** The values of a tensor as plain numbers (int64 converted; fine for shapes, indices and weights). */
export function tensorValues(t: TensorProto): number[] | Float32Array {
  const type = t.data_type ?? 0;
  const raw = t.raw_data;
  if (raw && raw.length > 0) {
    const buf = raw.buffer.slice(raw.byteOffset, raw.byteOffset + raw.byteLength);
    switch (type) {
      case TensorType.FLOAT: return new Float32Array(buf);
      case TensorType.DOUBLE: return Array.from(new Float64Array(buf));
      case TensorType.INT64: return Array.from(new BigInt64Array(buf), Number);
      case TensorType.INT32: return Array.from(new Int32Array(buf));
      case TensorType.UINT8: case TensorType.BOOL: return Array.from(new Uint8Array(buf));
      case TensorType.INT8: return Array.from(new Int8Array(buf));
      default: throw new Error(`unsupported tensor data type ${type} in ${t.name ?? 'tensor'}`);
    }
  }
  switch (type) {
    case TensorType.FLOAT: return Float32Array.from(t.float_data ?? []);
    case TensorType.DOUBLE: return t.double_data ?? [];
    case TensorType.INT64: return t.int64_data ?? [];
    case TensorType.INT32: case TensorType.UINT8: case TensorType.INT8: case TensorType.BOOL: return t.int32_data ?? [];
    default: throw new Error(`unsupported tensor data type ${type} in ${t.name ?? 'tensor'}`);
  }
}

export function floatTensor(name: string, dims: number[], values: ArrayLike<number>): TensorProto {
  const f = Float32Array.from(values as ArrayLike<number>);
  return { name, dims, data_type: TensorType.FLOAT, raw_data: new Uint8Array(f.buffer) };
}

export function int64Tensor(name: string, dims: number[], values: ArrayLike<number>): TensorProto {
  const b = BigInt64Array.from(Array.from(values as ArrayLike<number>, (v) => BigInt(v)));
  return { name, dims, data_type: TensorType.INT64, raw_data: new Uint8Array(b.buffer) };
}
