/**
 * Brings the model's own nodes to opset 18, the opset the appended backward nodes use
 * (ScatterND reduction 'add' needs 16, ReduceMean's axes input 18). Only the ops whose
 * interface changed between 11 and 18 are rewritten (ONNX Changelog.md):
 * - 13: Squeeze, Unsqueeze, ReduceSum axes and Split sizes move from attributes to inputs;
 *   Softmax, LogSoftmax and Hardmax change from "flatten to 2-D at axis" to "one axis".
 * - 18: the other Reduce* ops' axes move to an input.
 */
import { AttributeProto, NodeProto, TensorProto } from './proto';
import { int64Tensor } from './tensor';
import { decodeAttribute } from './graph';

export const TARGET_OPSET = 18;

const AXES_TO_INPUT_13 = new Set(['Squeeze', 'Unsqueeze', 'ReduceSum']);
const AXES_TO_INPUT_18 = new Set(['ReduceMean', 'ReduceMax', 'ReduceMin', 'ReduceProd', 'ReduceL1', 'ReduceL2', 'ReduceLogSum', 'ReduceLogSumExp', 'ReduceSumSquare']);
const SOFTMAX_LIKE = new Set(['Softmax', 'LogSoftmax', 'Hardmax']);

export interface UpgradedGraph {
  nodes: NodeProto[];
  initializers: TensorProto[];
  /** Shapes of tensors the upgrade introduced. */
  shapes: Map<string, number[]>;
}

export function upgradeToOpset18(nodes: NodeProto[], fromOpset: number, shapeOf: (t: string) => number[] | undefined): UpgradedGraph {
  const out: UpgradedGraph = { nodes: [], initializers: [], shapes: new Map() };
  if (fromOpset >= TARGET_OPSET) return { ...out, nodes };
  let counter = 0;
  const constant = (values: number[]): string => {
    const name = `ff_upgrade_c${counter++}`;
    out.initializers.push(int64Tensor(name, [values.length], values));
    return name;
  };
  for (const node of nodes) {
    const op = node.op_type ?? '';
    if ((node.domain ?? '') !== '' && node.domain !== 'ai.onnx') { out.nodes.push(node); continue; }
    const attrs = node.attribute ?? [];
    const moveAttr = (attrName: string) => {
      const a = attrs.find((x) => x.name === attrName);
      if (!a) { out.nodes.push(node); return; }
      const inputs = [...(node.input ?? [])];
      while (inputs.length < 1) inputs.push('');
      inputs[1] = constant(decodeAttribute(a) as number[]);
      out.nodes.push({ ...node, input: inputs, attribute: attrs.filter((x) => x !== a) });
    };
    if (fromOpset < 13 && AXES_TO_INPUT_13.has(op)) moveAttr('axes');
    else if (fromOpset < 13 && op === 'Split' && attrs.some((a) => a.name === 'split')) moveAttr('split');
    else if (op === 'Split' && !(node.input ?? [])[1] && !attrs.some((a) => a.name === 'num_outputs')) {
      // Opset 18 needs either sizes or num_outputs; before, equal parts were implied.
      out.nodes.push({ ...node, attribute: [...attrs, { name: 'num_outputs', type: 2, i: (node.output ?? []).length }] });
    }
    else if (AXES_TO_INPUT_18.has(op)) moveAttr('axes');
    else if (fromOpset < 13 && SOFTMAX_LIKE.has(op)) out.nodes.push(...softmaxTo13(node, attrs, shapeOf, constant, out.shapes));
    else out.nodes.push(node);
  }
  return out;
}

/** Opset < 13 softmax flattens to 2-D at `axis` (default 1); rewrite as Flatten → op(axis=−1) → Reshape. */
function softmaxTo13(node: NodeProto, attrs: AttributeProto[], shapeOf: (t: string) => number[] | undefined,
  constant: (v: number[]) => string, shapes: Map<string, number[]>): NodeProto[] {
  const x = node.input![0];
  const shape = shapeOf(x);
  const axisAttr = attrs.find((a) => a.name === 'axis');
  const rank = shape?.length ?? 2;
  let axis = axisAttr ? (decodeAttribute(axisAttr) as number) : 1;
  if (axis < 0) axis += rank;
  const rest = attrs.filter((a) => a.name !== 'axis');
  if (axis === rank - 1 || !shape) return [{ ...node, attribute: [...rest, { name: 'axis', type: 2, i: -1 }] }];
  const flat = `${node.output![0]}::flat`, soft = `${node.output![0]}::flat_out`;
  const rows = shape.slice(0, axis).reduce((a, b) => a * b, 1), cols = shape.slice(axis).reduce((a, b) => a * b, 1);
  shapes.set(flat, [rows, cols]);
  shapes.set(soft, [rows, cols]);
  return [
    { op_type: 'Flatten', name: `${node.name}::flatten`, input: [x], output: [flat], attribute: [{ name: 'axis', type: 2, i: axis }] },
    { ...node, input: [flat], output: [soft], attribute: [...rest, { name: 'axis', type: 2, i: -1 }] },
    { op_type: 'Reshape', name: `${node.name}::unflatten`, input: [soft, constant(shape)], output: node.output },
  ];
}
