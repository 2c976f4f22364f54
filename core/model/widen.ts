/**
 * float16 models are run in float32: every float16 initializer, Constant, Cast target and
 * declared tensor type is widened to float32 before anything else sees the model. float16 → float32
 * is exact for every value, so the weights are the shipped ones; the activations are then computed
 * in float32 instead of float16, which is what lets the backward (and its sums over many terms)
 * run in float32. The maps explain the shipped weights without float16's activation rounding.
 */
import { GraphProto, ModelProto, TensorProto, TensorType, ValueInfoProto } from './proto';

const FLOAT16 = TensorType.FLOAT16;

/** Whether the model holds float16 tensors (and so was widened by `widenFloat16`). */
export function hasFloat16(model: ModelProto): boolean {
  const g = model.graph;
  if (!g) return false;
  const typed = [...(g.input ?? []), ...(g.output ?? []), ...(g.value_info ?? [])];
  return typed.some((v) => v.type?.tensor_type?.elem_type === FLOAT16) || (g.initializer ?? []).some((t) => t.data_type === FLOAT16);
}

export function widenFloat16(model: ModelProto): void {
  if (model.graph) widenGraph(model.graph);
}

function widenGraph(g: GraphProto): void {
  g.initializer = (g.initializer ?? []).map(widenTensor);
  for (const v of [...(g.input ?? []), ...(g.output ?? []), ...(g.value_info ?? [])]) widenValueInfo(v);
  for (const n of g.node ?? []) {
    for (const a of n.attribute ?? []) {
      if (a.t) a.t = widenTensor(a.t);
      if (n.op_type === 'Cast' && a.name === 'to' && Number(a.i) === FLOAT16) a.i = TensorType.FLOAT;
      if (n.op_type === 'CastLike' || !a.g) continue;
      widenGraph(a.g);
    }
  }
}

function widenValueInfo(v: ValueInfoProto): void {
  const t = v.type?.tensor_type;
  if (t && t.elem_type === FLOAT16) t.elem_type = TensorType.FLOAT;
}

/** IEEE 754 binary16 bits → number: sign, 5-bit exponent (bias 15), 10-bit fraction; subnormals, inf, NaN. */
export function halfToNumber(h: number): number {
  const sign = h & 0x8000 ? -1 : 1, exp = (h >> 10) & 0x1f, frac = h & 0x3ff;
  if (exp === 0) return sign * frac * 2 ** -24;
  if (exp === 31) return frac ? NaN : sign * Infinity;
  return sign * (1 + frac / 1024) * 2 ** (exp - 15);
}

function widenTensor(t: TensorProto): TensorProto {
  if (t.data_type !== FLOAT16) return t;
  // ONNX stores float16 as raw little-endian bytes, or one bit pattern per int32_data entry (onnx.proto3).
  const raw = t.raw_data;
  const bits = raw && raw.length ? new Uint16Array(raw.buffer.slice(raw.byteOffset, raw.byteOffset + raw.byteLength)) : Uint16Array.from(t.int32_data ?? []);
  const values = Float32Array.from(bits, halfToNumber);
  return { ...t, data_type: TensorType.FLOAT, raw_data: new Uint8Array(values.buffer), int32_data: [], float_data: [] };
}
