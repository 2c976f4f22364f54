/** What every CLI command needs: the model prepared for its input, labels, preprocessing, inputs. */
import * as path from 'node:path';
import { Engine } from '../engine/engine';
import { loadModel } from '../model/load';
import { PreparedModel } from '../plan/prepared';
import { readSidecar, resolvePreprocessSpec } from '../io/sidecar';
import { loadLabels } from '../io/labels';
import { readNpy } from '../io/npy';
import { sha256File } from '../io/hash';
import { decodeImage, DecodedImage } from '../image/decode';
import { preprocessImage, PreprocessSpec, Geometry } from '../image/preprocess';
import { UserError } from '../errors';

export interface ModelContext {
  engine: Engine;
  pm: PreparedModel;
  labels: string[];
  spec: PreprocessSpec;
}

export async function openModel(engine: Engine, modelPath: string | undefined, labelsPath?: string): Promise<ModelContext> {
  if (!modelPath) throw new UserError('missing --model <model.onnx>');
  const model = loadModel(modelPath);
  const sidecar = await readSidecar(modelPath);
  const spec = resolvePreprocessSpec(model.input.dims, sidecar?.preprocess, sidecar ? `${modelPath} settings` : 'model settings', `${modelPath}: input '${model.input.name}'`);
  const dims = spec.layout === 'NCHW' ? [1, spec.channels === 'GRAY' ? 1 : 3, spec.size[0], spec.size[1]] : [1, spec.size[0], spec.size[1], spec.channels === 'GRAY' ? 1 : 3];
  const pm = await engine.prepare(model, dims);
  const labels = await loadLabels({ modelPath, labelsPath, sidecar, metadataProps: model.metadata, numClasses: pm.scores.numClasses });
  return { engine, pm, labels, spec };
}

export interface ModelInput {
  data: Float32Array;
  path: string;
  sha256: string;
  image?: DecodedImage;
  geometry?: Geometry;
}

export async function imageInput(ctx: ModelContext, file: string): Promise<ModelInput> {
  const image = await decodeImage(file);
  const pre = preprocessImage(image, ctx.spec);
  return { data: pre.data, path: path.resolve(file), sha256: await sha256File(file), image, geometry: pre.geometry };
}

/** A float32 tensor in the model's own layout, skipping preprocessing (--input x.npy). */
export async function tensorInput(ctx: ModelContext, file: string): Promise<ModelInput> {
  const npy = await readNpy(file);
  const want = ctx.pm.inputDims;
  const size = want.reduce((a, b) => a * b, 1);
  if (npy.data.length !== size) throw new UserError(`${file}: shape [${npy.shape.join(',')}] does not match the model input [${want.join(',')}]`);
  return { data: Float32Array.from(npy.data as ArrayLike<number>), path: path.resolve(file), sha256: await sha256File(file) };
}

export function softmax(z: Float32Array): Float32Array {
  const m = Math.max(...z);
  const e = z.map((v) => Math.exp(v - m));
  const s = e.reduce((a, b) => a + b, 0);
  return e.map((v) => v / s);
}

export function ranked(p: Float32Array, labels: string[], top: number): { index: number; label: string; p: number }[] {
  return Array.from(p, (v, i) => ({ index: i, label: labels[i], p: v })).sort((a, b) => b.p - a.p).slice(0, top);
}
