/** Reading an ONNX file from disk into an indexed, validated model. */
import { createHash } from 'node:crypto';
import { readFileSync, statSync, realpathSync } from 'node:fs';
import * as path from 'node:path';
import { UserError } from '../errors';
import { decodeModelProto, ModelProto, TensorProto, TensorType, ValueInfoProto } from './proto';
import { GraphIndex, indexGraph } from './graph';

/** IR and opset range this build understands (ORT 1.30 runs more; older opsets are upgraded to 18 for differentiation). */
export const IR_RANGE = [3, 10] as const;
export const OPSET_RANGE = [11, 21] as const;

export interface InputSpec {
  name: string;
  /** Dimensions as declared; strings for symbolic dims. */
  dims: (number | string)[];
  elemType: number;
}

export interface LoadedModel {
  path: string;
  sha256: string;
  proto: ModelProto;
  graph: GraphIndex;
  irVersion: number;
  /** Version of the default ONNX domain. */
  opset: number;
  input: InputSpec;
  /** The graph's first output (the classifier's output). */
  output: string;
  metadata: Record<string, string>;
}

/** `anyInput` accepts any single float input (single-op test graphs), not only images. */
export function loadModel(modelPath: string, opts: { anyInput?: boolean } = {}): LoadedModel {
  let bytes: Buffer;
  try {
    if (statSync(modelPath).isDirectory()) throw new UserError(`${modelPath} is a folder, not an ONNX file`, 'pass the path of a .onnx file');
    bytes = readFileSync(modelPath);
  } catch (e) {
    if (e instanceof UserError) throw e;
    throw new UserError(`cannot read model ${modelPath}: ${(e as NodeJS.ErrnoException).code ?? (e as Error).message}`, 'check the path');
  }
  return modelFromBytes(bytes, modelPath, opts);
}

export function modelFromBytes(bytes: Uint8Array, modelPath: string, opts: { anyInput?: boolean } = {}): LoadedModel {
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  let proto: ModelProto;
  try {
    proto = decodeModelProto(bytes);
  } catch (e) {
    throw new UserError(`${modelPath} is not an ONNX model (protobuf decoding failed: ${(e as Error).message})`, 'the file is truncated or of another type; re-export it');
  }
  const irVersion = proto.ir_version ?? 0;
  if (!proto.graph || !(proto.graph.node ?? []).length) {
    throw new UserError(`${modelPath} holds no ONNX graph`, 'the file is truncated or of another type; re-export it');
  }
  if (irVersion < IR_RANGE[0] || irVersion > IR_RANGE[1]) {
    throw new UserError(`${modelPath}: ONNX IR version ${irVersion} is outside the supported ${IR_RANGE[0]}–${IR_RANGE[1]}`, 'export with an IR version in that range');
  }
  const opset = (proto.opset_import ?? []).find((o) => !o.domain || o.domain === 'ai.onnx')?.version ?? 0;
  if (opset < OPSET_RANGE[0] || opset > OPSET_RANGE[1]) {
    throw new UserError(`${modelPath}: default-domain opset ${opset} is outside the supported ${OPSET_RANGE[0]}–${OPSET_RANGE[1]}`, `re-export with opset_version between ${OPSET_RANGE[0]} and ${OPSET_RANGE[1]} (17 is a good choice)`);
  }
  inlineExternalData(proto.graph.initializer ?? [], modelPath);
  const graph = indexGraph(proto.graph, modelPath);
  const input = pickImageInput(graph.inputs, modelPath, opts.anyInput ?? false);
  const output = graph.outputs[0]?.name;
  if (!output) throw new UserError(`${modelPath}: the graph declares no output`, 'the model is not valid ONNX; re-export it');
  const metadata: Record<string, string> = {};
  for (const p of proto.metadata_props ?? []) if (p.key) metadata[p.key] = p.value ?? '';
  return { path: modelPath, sha256, proto, graph, irVersion, opset, input, output, metadata };
}

function valueDims(v: ValueInfoProto): (number | string)[] {
  return (v.type?.tensor_type?.shape?.dim ?? []).map((d) => (d.dim_param ? d.dim_param : d.dim_value ?? '?'));
}

/** The classifier's image input: the one float tensor input of rank 3 or 4. */
function pickImageInput(inputs: ValueInfoProto[], modelPath: string, anyRank: boolean): InputSpec {
  if (inputs.length === 0) throw new UserError(`${modelPath}: the graph has no inputs`, 'the model is not valid ONNX; re-export it');
  const candidates = inputs.filter((v) => v.type?.tensor_type?.elem_type === TensorType.FLOAT && (anyRank || [3, 4].includes(valueDims(v).length)));
  if (inputs.length > 1) {
    throw new UserError(`${modelPath}: the model has ${inputs.length} inputs (${inputs.map((v) => v.name).join(', ')}); only single-image classifiers are supported`, 'export a model with one image input');
  }
  if (candidates.length !== 1) {
    const v = inputs[0];
    const t = v.type?.tensor_type?.elem_type;
    throw new UserError(`${modelPath}: input '${v.name}' is not a float image tensor (type ${t}, shape [${valueDims(v).join(',')}])`, 'the input must be float32 NCHW [1,C,H,W] or NHWC [1,H,W,C]');
  }
  const v = candidates[0];
  return { name: v.name ?? '', dims: valueDims(v), elemType: TensorType.FLOAT };
}

/** Loads external initializer data into raw_data so the model can be handed to the runtime as bytes. */
function inlineExternalData(inits: TensorProto[], modelPath: string): void {
  const dir = path.dirname(path.resolve(modelPath));
  for (const t of inits) {
    if (t.data_location !== 1) continue;
    const kv = new Map((t.external_data ?? []).map((e) => [e.key ?? '', e.value ?? '']));
    const location = kv.get('location');
    if (!location) throw new UserError(`${modelPath}: initializer '${t.name}' uses external data without a location`, 're-export the model with its data file');
    const file = path.resolve(dir, location);
    const rel = path.relative(dir, file);
    if (path.isAbsolute(location) || rel.startsWith('..') || path.isAbsolute(rel)) {
      throw new UserError(`${modelPath}: initializer '${t.name}' points outside the model's folder (${location})`, 'external data files must sit in the model folder or below it');
    }
    let real: string;
    try { real = realpathSync(file); } catch {
      throw new UserError(`${modelPath}: external data file '${location}' for initializer '${t.name}' is missing`, 'copy the data file next to the model');
    }
    const realRel = path.relative(realpathSync(dir), real);
    if (realRel.startsWith('..') || path.isAbsolute(realRel)) {
      throw new UserError(`${modelPath}: external data '${location}' links outside the model's folder`, 'external data files must sit in the model folder or below it');
    }
    const data = readFileSync(real);
    const offset = Number(kv.get('offset') ?? 0);
    const length = kv.has('length') ? Number(kv.get('length')) : data.length - offset;
    if (!(offset >= 0 && length >= 0 && offset + length <= data.length)) {
      throw new UserError(`${modelPath}: external data for '${t.name}' lies beyond the end of ${location}`, 'the data file is truncated; re-export the model');
    }
    t.raw_data = new Uint8Array(data.subarray(offset, offset + length));
    t.data_location = 0;
    t.external_data = [];
  }
}
