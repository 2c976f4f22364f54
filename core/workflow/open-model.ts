/** A model opened the way both programs open it: prepared for its input, with its labels and preprocessing. */
import { Engine } from '../engine/engine';
import { loadModel } from '../model/load';
import { PreparedModel } from '../plan/prepared';
import { readSidecar, resolvePreprocessSpec } from '../io/sidecar';
import { loadLabels } from '../io/labels';
import type { PreprocessSpec } from '../image/preprocess';

export interface ModelContext {
  engine: Engine;
  pm: PreparedModel;
  labels: string[];
  spec: PreprocessSpec;
}

export async function openModel(engine: Engine, modelPath: string, labelsPath?: string): Promise<ModelContext> {
  const model = loadModel(modelPath);
  const sidecar = await readSidecar(modelPath);
  const spec = resolvePreprocessSpec(model.input.dims, sidecar?.preprocess, sidecar ? `${modelPath} settings` : 'model settings', `${modelPath}: input '${model.input.name}'`);
  const dims = spec.layout === 'NCHW' ? [1, spec.channels === 'GRAY' ? 1 : 3, spec.size[0], spec.size[1]] : [1, spec.size[0], spec.size[1], spec.channels === 'GRAY' ? 1 : 3];
  const pm = await engine.prepare(model, dims);
  const labels = await loadLabels({ modelPath, labelsPath, sidecar, metadataProps: model.metadata, numClasses: pm.scores.numClasses });
  return { engine, pm, labels, spec };
}
