/**
 * The shape probe: one forward run that exposes every intermediate tensor, recording its shape,
 * element type and (for small or integer tensors) its values. Plans are then specialised to
 * these concrete shapes (DESIGN §3).
 */
import { LoadedModel } from '../model/load';
import { TensorFacts, factKind } from '../model/analysis';
import { encodeModelProto } from '../model/proto';
import { createSession, defaultRuntimeOptions, floatTensor, runSession, RuntimeOptions } from './runtime';

export async function probeModel(model: LoadedModel, inputDims: number[], input: Float32Array | undefined, opts?: RuntimeOptions): Promise<TensorFacts> {
  const g = model.proto.graph!;
  const names = new Set<string>();
  for (const n of g.node ?? []) for (const o of n.output ?? []) if (o) names.add(o);
  const probe = { ...model.proto, graph: { ...g, output: [...names].map((name) => ({ name })) } };
  // 'extended', not 'all': the layout optimizations of 'all' die with SIGFPE in onnxruntime 1.30
  // when a tensor's spatial size shrinks to 0 (an input too small for the model; found by
  // test/fuzz), where 'extended' reports the node cleanly. The probe runs first, so it catches it.
  const session = await createSession(encodeModelProto(probe), model.path, { ...(opts ?? defaultRuntimeOptions), optimization: 'extended' });
  const size = inputDims.reduce((a, b) => a * b, 1);
  const x = input ?? new Float32Array(size).fill(0.5);
  const result = await runSession(session, { [model.input.name]: floatTensor(x, inputDims) }, [...names], `${model.path} (shape probe)`);
  const facts: TensorFacts = new Map();
  for (const [name, t] of Object.entries(result)) {
    const kind = factKind(t.type);
    const small = t.size <= 64;
    const value = kind !== 'float' || small ? Array.from(t.data as ArrayLike<number | bigint>, Number) : undefined;
    facts.set(name, { dims: t.dims.map(Number), kind, value: kind === 'other' ? undefined : value });
  }
  await session.release();
  return facts;
}

/** The concrete batch-1 input shape: symbolic dims become 1 (batch) or `spatial` (image size). */
export function concreteInputDims(dims: (number | string)[], spatial = 224): number[] {
  return dims.map((d, i) => (typeof d === 'number' && d > 0 ? (i === 0 ? 1 : d) : i === 0 ? 1 : spatial));
}
