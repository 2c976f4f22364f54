/** Reading TensorProto payloads into typed arrays, and building small constant tensors. */
import { ELEM_BITS, elemTypeName, TensorProto, TensorType } from './proto';
import { UserError } from '../errors';

export type NumericArray = Float32Array | Float64Array | BigInt64Array | Int32Array | Uint8Array;

export function tensorElementCount(t: TensorProto): number {
  return (t.dims ?? []).reduce((a, b) => a * b, 1);
}

/**
 * Checks that a tensor's payload matches its declared shape and type, so a damaged file is named
 * here instead of failing somewhere inside the runtime. `what` names the tensor for the message.
 */
export function checkTensorPayload(t: TensorProto, what: string): void {
  const dims = t.dims ?? [];
  const shape = `[${dims.join(',')}]`;
  const fix = 'the file is damaged or was written by a faulty exporter; re-export the model';
  if (dims.some((d) => !Number.isSafeInteger(d) || d < 0)) throw new UserError(`${what} has an invalid shape ${shape}`, fix);
  const type = t.data_type ?? 0;
  if (type === TensorType.STRING) return;
  const bits = ELEM_BITS[type];
  if (!bits) throw new UserError(`${what} has data type ${type}, which is not an ONNX tensor type`, fix);
  const count = dims.reduce((a, b) => a * b, 1);
  if (t.data_location === 1) return; // external data is checked when it is read
  const raw = t.raw_data;
  const typeName = elemTypeName(type);
  if (raw && raw.length > 0) {
    const need = Math.ceil((count * bits) / 8);
    if (raw.length !== need) throw new UserError(`${what} holds ${raw.length} bytes of data, but its shape ${shape} of ${typeName} needs ${need}`, fix);
    return;
  }
  // Typed fields (onnx.proto): which repeated field carries each type, and values per element.
  const field: [unknown[] | undefined, number] | undefined =
    type === TensorType.FLOAT ? [t.float_data, 1]
      : type === 14 ? [t.float_data, 2]
        : type === TensorType.INT64 ? [t.int64_data, 1]
          : type === TensorType.DOUBLE ? [t.double_data, 1]
            : type === 15 ? [t.double_data, 2]
              : type === TensorType.UINT32 || type === TensorType.UINT64 ? [t.uint64_data, 1]
                : bits === 4 ? undefined // packed two per int32; left to the runtime
                  : [t.int32_data, 1];
  if (!field) return;
  const have = field[0]?.length ?? 0;
  if (have !== count * field[1]) throw new UserError(`${what} holds ${have} values, but its shape ${shape} of ${typeName} needs ${count * field[1]}`, fix);
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
