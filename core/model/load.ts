/** Reading an ONNX file from disk into an indexed, validated model. */
import { createHash } from 'node:crypto';
import { readFileSync, statSync, realpathSync } from 'node:fs';
import * as path from 'node:path';
import { UserError } from '../errors';
import { decodeModelProto, elemTypeName, ModelProto, NodeProto, TensorProto, TensorType, ValueInfoProto } from './proto';
import { GraphIndex, indexGraph } from './graph';
import { checkTensorPayload } from './tensor';
import { sniffFileType } from './sniff';
import { hasFloat16, widenFloat16 } from './widen';
import { checkUpgradable } from './upgrade';
import { floatFeedForBytes, uint8InputHint } from './raw-input';

/** IR and opset range this build understands (ORT 1.30 runs more; models are upgraded to opset 18 for differentiation). */
export const IR_RANGE = [3, 10] as const;
export const OPSET_RANGE = [7, 21] as const;

/**
 * Most values a model input may hold: 2^26 float32 values (256 MB), e.g. 3×4096×4096. Classifier
 * inputs are far smaller; beyond this the probe's input alone would strain a laptop. A rule of
 * thumb, no source.
 */
export const MAX_INPUT_VALUES = 2 ** 26;
/** Longest input side accepted: 8192 pixels, beyond any classifier's input (rule of thumb, no source). */
export const MAX_INPUT_SIDE = 8192;

/** Op domains onnxruntime's CPU build knows besides the default one (from its docs, from memory). */
const RUNTIME_DOMAINS = new Set(['', 'ai.onnx', 'ai.onnx.ml', 'com.microsoft', 'com.microsoft.nchwc', 'ai.onnx.preview.training']);

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
  /** The classifier's output: the one chosen by name (`scores` option), else the graph's first. */
  output: string;
  metadata: Record<string, string>;
  /** The file holds float16 tensors; they were widened to float32 (widen.ts) and run in float32. */
  widenedFromFloat16: boolean;
  /**
   * The file's input is 8-bit raw pixels with the preprocessing in the graph (raw-input.ts): it is
   * fed the 0–255 values as float32, and the image preprocessing defaults to `raw255`.
   */
  rawPixelInput?: 'uint8';
}

export interface LoadOptions {
  /** Accept any single float input (single-op test graphs), not only images. */
  anyInput?: boolean;
  /** Name of the graph output holding the class scores, for models with several outputs. */
  scores?: string;
}

export function loadModel(modelPath: string, opts: LoadOptions = {}): LoadedModel {
  let bytes: Buffer;
  try {
    if (statSync(modelPath).isDirectory()) throw new UserError(`${modelPath} is a folder, not an ONNX file`, 'pass the path of a .onnx file');
    bytes = readFileSync(modelPath);
  } catch (e) {
    if (e instanceof UserError) throw e;
    const code = (e as NodeJS.ErrnoException).code;
    const why = code === 'ENOENT' ? 'no such file' : code === 'EACCES' || code === 'EPERM' ? 'permission denied' : code ?? (e as Error).message;
    throw new UserError(`cannot read model ${modelPath}: ${why}`, 'check the path');
  }
  return modelFromBytes(bytes, modelPath, opts);
}

export function modelFromBytes(bytes: Uint8Array, modelPath: string, opts: LoadOptions = {}): LoadedModel {
  const sha256 = createHash('sha256').update(bytes).digest('hex');
  if (bytes.length === 0) throw new UserError(`${modelPath} is empty (0 bytes)`, 'the export or copy did not finish; export the model again');
  const other = sniffFileType(bytes);
  if (other) throw new UserError(`${modelPath} is ${other}, not an ONNX model`, 'export the model to ONNX (e.g. torch.onnx.export) and open the .onnx file');
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
  if (opset === 0) throw new UserError(`${modelPath} imports no default-domain ONNX opset`, `re-export with opset_version between ${OPSET_RANGE[0]} and ${OPSET_RANGE[1]} (17 is a good choice)`);
  if (opset < OPSET_RANGE[0] || opset > OPSET_RANGE[1]) {
    throw new UserError(`${modelPath}: default-domain opset ${opset} is outside the supported ${OPSET_RANGE[0]}–${OPSET_RANGE[1]}`, `re-export with opset_version between ${OPSET_RANGE[0]} and ${OPSET_RANGE[1]} (17 is a good choice)`);
  }
  dropTrailingEmptyInputs(proto.graph.node ?? []);
  inlineExternalData(proto.graph.initializer ?? [], modelPath);
  const widenedFromFloat16 = hasFloat16(proto);
  if (widenedFromFloat16) widenFloat16(proto);
  for (const t of proto.graph.initializer ?? []) checkTensorPayload(t, `${modelPath}: initializer '${t.name ?? ''}'`);
  refuseCustomOps(proto, modelPath);
  const rawPixelInput = opts.anyInput ? undefined : floatFeedForBytes(proto);
  checkUpgradable(proto.graph.node ?? [], opset, modelPath);
  const graph = indexGraph(proto.graph, modelPath);
  for (const n of graph.nodes) {
    for (const [k, v] of n.attrs) {
      if (v && typeof v === 'object' && !Array.isArray(v) && 'data_type' in v) checkTensorPayload(v, `${modelPath}: attribute '${k}' of ${n.opType} node '${n.name}'`);
    }
  }
  const input = pickImageInput(graph.inputs, modelPath, opts.anyInput ?? false, proto);
  const output = pickOutput(graph.outputs, modelPath, opts.scores);
  const metadata: Record<string, string> = {};
  for (const p of proto.metadata_props ?? []) if (p.key) metadata[p.key] = p.value ?? '';
  return { path: modelPath, sha256, proto, graph, irVersion, opset, input, output, metadata, widenedFromFloat16, ...(rawPixelInput ? { rawPixelInput } : {}) };
}

/**
 * An omitted optional input may be written as '' or left out; trailing ones are left out here.
 * Same graph by the ONNX spec, and it avoids an onnxruntime 1.30 crash (SIGSEGV in its extended
 * graph optimizations) on a LayerNormalization whose bias is given as '' (found by test/fuzz).
 */
function dropTrailingEmptyInputs(nodes: NodeProto[]): void {
  for (const n of nodes) {
    const inputs = n.input ?? [];
    while (inputs.length && !inputs[inputs.length - 1]) inputs.pop();
  }
}

/** Nodes of a domain onnxruntime does not know and the model defines no function for: custom ops, which need their library. */
function refuseCustomOps(proto: ModelProto, modelPath: string): void {
  const functions = new Set(((proto.functions ?? []) as { domain?: string; name?: string }[]).map((f) => `${f.domain ?? ''}|${f.name ?? ''}`));
  const n = (proto.graph?.node ?? []).find((x) => !RUNTIME_DOMAINS.has(x.domain ?? '') && !functions.has(`${x.domain}|${x.op_type}`));
  if (n) {
    throw new UserError(`${modelPath}: ${n.op_type} node '${n.name || '(unnamed)'}' is a custom op of domain '${n.domain}', which needs its own runtime library`, 'export the model with standard ONNX ops only');
  }
}

/** The named output, or the first; a name that is not an output is refused with the ones there are. */
function pickOutput(outputs: ValueInfoProto[], modelPath: string, wanted: string | undefined): string {
  const names = outputs.map((o) => o.name ?? '');
  if (!names.length || !names[0]) throw new UserError(`${modelPath}: the graph declares no output`, 'the model is not valid ONNX; re-export it');
  if (wanted === undefined) return names[0];
  if (!names.includes(wanted)) {
    throw new UserError(`${modelPath}: the model has no output '${wanted}' (its outputs: ${names.join(', ')})`, 'pass one of those names as the scores output (--scores NAME)');
  }
  return wanted;
}

function valueDims(v: ValueInfoProto): (number | string)[] {
  return (v.type?.tensor_type?.shape?.dim ?? []).map((d) => (d.dim_param ? d.dim_param : d.dim_value ?? '?'));
}

/** The classifier's image input: the one float tensor input of rank 3 or 4. */
function pickImageInput(inputs: ValueInfoProto[], modelPath: string, anyRank: boolean, proto?: ModelProto): InputSpec {
  if (inputs.length === 0) throw new UserError(`${modelPath}: the graph has no inputs`, 'the model is not valid ONNX; re-export it');
  const candidates = inputs.filter((v) => v.type?.tensor_type?.elem_type === TensorType.FLOAT && (anyRank || [3, 4].includes(valueDims(v).length)));
  if (inputs.length > 1) {
    throw new UserError(`${modelPath}: the model has ${inputs.length} inputs (${inputs.map((v) => v.name).join(', ')}); only single-image classifiers are supported`, 'export a model with one image input');
  }
  if (candidates.length !== 1) {
    const v = inputs[0];
    const t = v.type?.tensor_type?.elem_type;
    const hint = 'the input must be float32 NCHW [1,C,H,W] or NHWC [1,H,W,C]';
    throw new UserError(`${modelPath}: input '${v.name}' is not a float image tensor (${elemTypeName(t)}, shape [${valueDims(v).join(',')}])`,
      t === TensorType.UINT8 && proto ? `${hint}; ${uint8InputHint(proto, v.name ?? '')}` : hint);
  }
  const v = candidates[0];
  const dims = valueDims(v);
  const shape = `[${dims.join(',')}]`;
  dims.forEach((d, i) => {
    if (typeof d === 'number' && d <= 0) {
      throw new UserError(`${modelPath}: input '${v.name}' ${shape}: dimension ${i} is ${d}`, 'a dimension must be positive or a named dynamic axis; re-export the model');
    }
    if (typeof d === 'number' && d > MAX_INPUT_SIDE) {
      throw new UserError(`${modelPath}: input '${v.name}' ${shape}: dimension ${i} is ${d}, over the ${MAX_INPUT_SIDE} any image classifier takes`, 'export the model at the image size it was trained for');
    }
  });
  // A fixed batch above 1 would make every map a mix of several images' gradients: refused
  // rather than guessed (explaining item 0 would mean feeding copies and reading one row).
  if (!anyRank && dims.length === 4 && typeof dims[0] === 'number' && dims[0] > 1) {
    throw new UserError(`${modelPath}: input '${v.name}' ${shape} has a fixed batch of ${dims[0]}; maps explain one image at a time`, 're-export the model with batch 1 or a dynamic batch axis (torch.onnx.export dynamic_axes={"input": {0: "batch"}})');
  }
  const values = dims.reduce<number>((a, d) => a * (typeof d === 'number' ? d : 1), 1);
  if (values > MAX_INPUT_VALUES) {
    throw new UserError(`${modelPath}: input '${v.name}' ${shape} is too large (${values.toExponential(2)} values, over ${MAX_INPUT_VALUES.toExponential(2)})`, 'export the model at the image size it was trained for');
  }
  return { name: v.name ?? '', dims, elemType: TensorType.FLOAT };
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
