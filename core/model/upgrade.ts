/**
 * Brings the model's own nodes to opset 18, the opset the appended backward nodes use
 * (ScatterND reduction 'add' needs 16, ReduceMean's axes input 18). Only the ops whose
 * interface changed between 7 and 18 are rewritten (ONNX Changelog.md):
 * - before 11: Upsample (7–9) and Resize-10 become Resize with their fixed 'asymmetric'
 *   coordinates; Slice starts/ends/axes (before 10), Pad pads/value and Clip min/max move to
 *   inputs; BatchNormalization loses `spatial` (before 9), Dropout its `ratio` (before 12;
 *   Dropout is the identity at inference either way).
 * - 13: Squeeze, Unsqueeze, ReduceSum axes and Split sizes move from attributes to inputs;
 *   Softmax, LogSoftmax and Hardmax change from "flatten to 2-D at axis" to "one axis".
 * - 18: the other Reduce* ops' axes move to an input.
 */
import { AttributeProto, NodeProto, TensorProto } from './proto';
import { floatTensor, int64Tensor } from './tensor';
import { decodeAttribute } from './graph';
import { UserError } from '../errors';

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
  const floatConstant = (dims: number[], values: number[]): string => {
    const name = `ff_upgrade_c${counter++}`;
    out.initializers.push(floatTensor(name, dims, values));
    return name;
  };
  for (const original of nodes) {
    const node = fromOpset < 11 ? upgradeBefore11(original, fromOpset, constant, floatConstant) : original;
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

/**
 * Refuses, at load and before any run, the few old-opset forms that have no later equivalent, so
 * the user hears the node and the fix instead of a runtime error from the shape probe.
 */
export function checkUpgradable(nodes: NodeProto[], fromOpset: number, modelPath: string): void {
  if (fromOpset >= 11) return;
  for (const n of nodes) {
    const op = n.op_type ?? '';
    if (op === 'BatchNormalization' || op === 'Upsample' || op === 'Resize') {
      try { upgradeBefore11(n, fromOpset, () => 'check', () => 'check'); } catch (e) {
        if (e instanceof UserError) throw new UserError(`${modelPath}: ${e.message}`, e.hint);
        throw e;
      }
    }
  }
}

const utf8 = new TextEncoder();
const INT64_LIMIT = 2 ** 62; // Slice ends of INT64_MAX mean "to the end"; any bound past the axis clamps the same (ONNX Slice spec)

function attrValue(node: NodeProto, name: string): unknown {
  const a = (node.attribute ?? []).find((x) => x.name === name);
  return a ? decodeAttribute(a) : undefined;
}

function withoutAttrs(node: NodeProto, names: string[]): NodeProto['attribute'] {
  return (node.attribute ?? []).filter((a) => !names.includes(a.name ?? ''));
}

function stringAttr(name: string, value: string): AttributeProto {
  return { name, type: 3, s: utf8.encode(value) };
}

/**
 * Rewrites one node of an opset 7–10 model into its opset-11 form (ONNX Changelog.md, Operators.md
 * for each op's old version). Nodes of other domains and unchanged ops come back as they are.
 */
function upgradeBefore11(node: NodeProto, fromOpset: number, int64s: (v: number[]) => string,
  floats: (dims: number[], v: number[]) => string): NodeProto {
  if ((node.domain ?? '') !== '' && node.domain !== 'ai.onnx') return node;
  const op = node.op_type ?? '';
  const inputs = [...(node.input ?? [])];
  const label = `${op} node '${node.name || node.output?.[0] || '(unnamed)'}'`;
  switch (op) {
    case 'Upsample':
    case 'Resize': {
      // Upsample-7/9 and Resize-10: out(x) = in(x / scale) with nearest = floor, linear = the
      // same asymmetric coordinates (Operators.md, Upsample-9 and Resize-10). Resize-11 names both.
      const mode = String(attrValue(node, 'mode') ?? 'nearest');
      if (mode !== 'nearest' && mode !== 'linear' && mode !== 'bilinear') {
        throw new UserError(`${label}: mode '${mode}' of opset ${fromOpset} has no opset-11 equivalent`, 're-export the model with opset 11 or later');
      }
      const scales = op === 'Upsample' && fromOpset < 9 ? floats([(attrValue(node, 'scales') as number[]).length], attrValue(node, 'scales') as number[]) : inputs[1];
      if (!scales) throw new UserError(`${label}: no scales given`, 'the model is not valid ONNX; re-export it');
      return {
        ...node, op_type: 'Resize', input: [inputs[0], '', scales],
        attribute: [stringAttr('mode', mode === 'nearest' ? 'nearest' : 'linear'), stringAttr('coordinate_transformation_mode', 'asymmetric'),
          ...(mode === 'nearest' ? [stringAttr('nearest_mode', 'floor')] : [])],
      };
    }
    case 'Slice': {
      if (fromOpset >= 10) return node;
      const clamp = (v: number[]) => v.map((x) => Math.max(-INT64_LIMIT, Math.min(INT64_LIMIT, Number(x))));
      const starts = attrValue(node, 'starts') as number[], ends = attrValue(node, 'ends') as number[];
      const axes = attrValue(node, 'axes') as number[] | undefined;
      const ins = [inputs[0], int64s(clamp(starts)), int64s(clamp(ends)), ...(axes ? [int64s(axes)] : [])];
      return { ...node, input: ins, attribute: withoutAttrs(node, ['starts', 'ends', 'axes']) };
    }
    case 'Pad': {
      const pads = attrValue(node, 'pads') as number[] | undefined;
      if (!pads) return node;
      const value = Number(attrValue(node, 'value') ?? 0);
      return { ...node, input: [inputs[0], int64s(pads), floats([], [value])], attribute: withoutAttrs(node, ['pads', 'value']) };
    }
    case 'Clip': {
      const min = attrValue(node, 'min') as number | undefined, max = attrValue(node, 'max') as number | undefined;
      const ins = [inputs[0], min === undefined ? '' : floats([], [min]), max === undefined ? '' : floats([], [max])];
      while (ins.length > 1 && !ins[ins.length - 1]) ins.pop();
      return { ...node, input: ins, attribute: withoutAttrs(node, ['min', 'max']) };
    }
    case 'BatchNormalization': {
      // spatial=0 (one statistic per C×H×W element) has no later equivalent.
      if (attrValue(node, 'spatial') === 0) {
        throw new UserError(`${label}: spatial=0 (per-element statistics, opset ${fromOpset}) has no opset-9+ equivalent`, 're-export the model with opset 9 or later');
      }
      return { ...node, attribute: withoutAttrs(node, ['spatial']) };
    }
    case 'Dropout':
      return { ...node, attribute: withoutAttrs(node, ['ratio']) };
    default:
      return node;
  }
}
