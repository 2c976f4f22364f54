/**
 * Models that take raw 8-bit pixels: the image input is uint8 and the graph does its own
 * preprocessing (Cast to float, Div 255, Sub mean, Div std, Transpose). Gradients need a float
 * tensor to start from, so the input is declared float32 and fed the same 0–255 values: every
 * 8-bit value is exact in float32 and the Cast that follows becomes float→float, so the graph
 * computes what it computed before. The first float tensor is then the Cast's output, whose
 * gradient is the input's own (the Cast rule passes it through): detail maps are gradients with
 * respect to the raw pixel values.
 */
import { ModelProto, NodeProto, TensorType } from './proto';

/**
 * When the single graph input is a uint8 tensor of rank 3 or 4, makes it float32 and returns its
 * type name. Otherwise (another type, or a consumer other than a Cast to float: the loader refuses
 * that input, see uint8InputHint) undefined.
 */
export function floatFeedForBytes(model: ModelProto): 'uint8' | undefined {
  const g = model.graph;
  if (!g) return undefined;
  const inits = new Set((g.initializer ?? []).map((t) => t.name));
  const inputs = (g.input ?? []).filter((v) => !inits.has(v.name));
  if (inputs.length !== 1) return undefined;
  const tt = inputs[0].type?.tensor_type;
  const rank = tt?.shape?.dim?.length ?? 0;
  if (!tt || tt.elem_type !== TensorType.UINT8 || (rank !== 3 && rank !== 4)) return undefined;
  const name = inputs[0].name ?? '';
  const consumers = (g.node ?? []).filter((n) => (n.input ?? []).includes(name));
  if (!consumers.length || !consumers.every(isCastToFloat)) return undefined;
  tt.elem_type = TensorType.FLOAT;
  return 'uint8';
}

/** The fix for a uint8 input that does not go through a Cast to float first, naming what it feeds. */
export function uint8InputHint(model: ModelProto, input: string): string {
  const n = (model.graph?.node ?? []).find((x) => (x.input ?? []).includes(input) && !isCastToFloat(x));
  const what = n ? `; here it feeds ${n.op_type} node '${n.name || '(unnamed)'}'${n.op_type === 'Cast' ? ' (a Cast to another type)' : ''}` : '';
  return `uint8 pixels are read when every consumer of the input is a Cast to float32${what}: export with x.float() as the first step, or with a float32 input`;
}

function isCastToFloat(n: NodeProto): boolean {
  return n.op_type === 'Cast' && Number((n.attribute ?? []).find((a) => a.name === 'to')?.i ?? -1) === TensorType.FLOAT;
}
