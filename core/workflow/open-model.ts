/** A model opened the way both programs open it: prepared for its input, with its labels and preprocessing. */
import { Engine } from '../engine/engine';
import { loadModel } from '../model/load';
import { PreparedModel } from '../plan/prepared';
import { readSidecar, resolvePreprocessSpec } from '../io/sidecar';
import { loadLabelsWithSource, LabelSource } from '../io/labels';
import type { PreprocessSpec } from '../image/preprocess';

/** Where the preprocessing and the labels came from: what a user is told when either is a guess. */
export interface ModelOrigin {
  /** 'guessed': no preprocess in the model's settings file; the spec follows the input shape. */
  preprocessing: 'sidecar' | 'guessed';
  /** 'generated': no labels anywhere; the names are `class 0` … `class N−1`. */
  labels: LabelSource;
  /** The labels file, or the metadata key, they were read from. */
  labelsFrom?: string;
}

export interface ModelContext {
  engine: Engine;
  pm: PreparedModel;
  labels: string[];
  spec: PreprocessSpec;
  origin: ModelOrigin;
}

export async function openModel(engine: Engine, modelPath: string, labelsPath?: string): Promise<ModelContext> {
  const model = loadModel(modelPath);
  const sidecar = await readSidecar(modelPath);
  // A model taking raw uint8 pixels does its own scaling: it is fed the 0–255 values (raw255) unless its settings say otherwise.
  const spec = resolvePreprocessSpec(model.input.dims, sidecar?.preprocess ?? (model.rawPixelInput ? { preset: 'raw255' } : undefined), sidecar ? `${modelPath} settings` : 'model settings', `${modelPath}: input '${model.input.name}'`);
  const dims = spec.layout === 'NCHW' ? [1, spec.channels === 'GRAY' ? 1 : 3, spec.size[0], spec.size[1]] : [1, spec.size[0], spec.size[1], spec.channels === 'GRAY' ? 1 : 3];
  const pm = await engine.prepare(model, dims);
  const loaded = await loadLabelsWithSource({ modelPath, labelsPath, sidecar, metadataProps: model.metadata, numClasses: pm.scores.numClasses });
  const origin: ModelOrigin = {
    preprocessing: sidecar?.preprocess ? 'sidecar' : 'guessed',
    labels: loaded.source,
    ...(loaded.from !== undefined ? { labelsFrom: loaded.from } : {}),
  };
  return { engine, pm, labels: loaded.labels, spec, origin };
}
