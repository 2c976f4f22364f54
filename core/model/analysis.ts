/**
 * What differentiation needs to know about every tensor, from the graph and the shape probe:
 * its concrete shape, whether it depends on the image's values (only those carry gradients),
 * and the values of everything that does not (weights, Constant nodes, shape arithmetic such as
 * Shape→Gather→Concat→Reshape chains, which are constants once shapes are fixed).
 */
import { GraphIndex } from './graph';
import { tensorValues } from './tensor';
import { TensorType } from './proto';
import { UserError } from '../errors';

export interface TensorFact {
  dims: number[];
  kind: 'float' | 'int' | 'bool' | 'other';
  /** Values of image-independent non-float tensors (and small float ones), read in the probe. */
  value?: number[];
}

export type TensorFacts = Map<string, TensorFact>;

/** Ops whose outputs depend only on the input's shape, not its values. */
const SHAPE_ONLY = new Set(['Shape', 'Size']);

export interface ModelAnalysis {
  graph: GraphIndex;
  facts: TensorFacts;
  inputName: string;
  shape(name: string): number[];
  /**
   * Depends on the image's values and is float, or is the integer output of a QuantizeLinear
   * standing for a float value (gradients pass it straight through): gradients flow through it.
   */
  differentiable(name: string): boolean;
  /** Differentiable and float: a tensor whose values a map may use as an activation. */
  floatValued(name: string): boolean;
  value(name: string): number[] | undefined;
}

export function analyseModel(graph: GraphIndex, facts: TensorFacts, inputName: string, modelPath: string): ModelAnalysis {
  const valueDependent = new Set<string>([inputName]);
  for (const n of graph.order) {
    if (SHAPE_ONLY.has(n.opType)) continue;
    if (n.inputs.some((i) => valueDependent.has(i))) for (const o of n.outputs) if (o) valueDependent.add(o);
  }
  const constants = new Map<string, number[]>();
  const constantValue = (name: string): number[] | undefined => {
    if (constants.has(name)) return constants.get(name);
    let v: number[] | undefined;
    const init = graph.initializers.get(name);
    if (init) v = Array.from(tensorValues(init));
    else {
      const p = graph.producer.get(name);
      const t = p?.opType === 'Constant' ? p.attrs.get('value') : undefined;
      if (t && typeof t === 'object' && !Array.isArray(t)) v = Array.from(tensorValues(t as never));
      else if (p?.opType === 'Constant') {
        const f = p.attrs.get('value_float') ?? p.attrs.get('value_int') ?? p.attrs.get('value_floats') ?? p.attrs.get('value_ints');
        if (f !== undefined) v = Array.isArray(f) ? (f as number[]) : [f as number];
      }
      if (!v && !valueDependent.has(name)) v = facts.get(name)?.value;
    }
    if (v) constants.set(name, v);
    return v;
  };
  return {
    graph,
    facts,
    inputName,
    shape(name) {
      const f = facts.get(name);
      if (f) return f.dims;
      const init = graph.initializers.get(name);
      if (init) return init.dims ?? [];
      throw new UserError(`${modelPath}: no shape known for tensor '${name}'`, 'the shape probe did not reach it; is the model valid?');
    },
    differentiable(name) {
      if (!valueDependent.has(name)) return false;
      const kind = facts.get(name)?.kind;
      return kind === 'float' || graph.producer.get(name)?.opType === 'QuantizeLinear';
    },
    floatValued(name) {
      return valueDependent.has(name) && facts.get(name)?.kind === 'float';
    },
    value(name) {
      if (valueDependent.has(name)) return undefined;
      return constantValue(name);
    },
  };
}

export function factKind(elemType: number | string): TensorFact['kind'] {
  if (elemType === TensorType.FLOAT || elemType === 'float32') return 'float';
  if ([TensorType.INT64, TensorType.INT32, TensorType.INT8, TensorType.UINT8].includes(elemType as never) || ['int64', 'int32', 'int8', 'uint8'].includes(elemType as string)) return 'int';
  if (elemType === TensorType.BOOL || elemType === 'bool') return 'bool';
  return 'other';
}
