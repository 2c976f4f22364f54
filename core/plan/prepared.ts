/** A model made ready for planning: upgraded to opset 18, analysed with concrete shapes. */
import { LoadedModel } from '../model/load';
import { ModelAnalysis, TensorFacts, analyseModel } from '../model/analysis';
import { upgradeToOpset18, TARGET_OPSET } from '../model/upgrade';
import { indexGraph } from '../model/graph';
import { findScores, ScoresInfo } from '../model/scores';
import { LayerInfo, listLayers } from '../model/layers';
import { NodeProto, TensorProto } from '../model/proto';

export interface PreparedModel {
  model: LoadedModel;
  /** Concrete input shape the plans are specialised to (batch 1). */
  inputDims: number[];
  nodes: NodeProto[];
  initializers: TensorProto[];
  opset: number;
  analysis: ModelAnalysis;
  scores: ScoresInfo;
  layers: LayerInfo[];
}

/** `anyScores` treats the output as the scores whatever its shape (for testing single ops). */
export function prepareModel(model: LoadedModel, facts: TensorFacts, inputDims: number[], anyScores = false): PreparedModel {
  const original = model.proto.graph!;
  const up = upgradeToOpset18(original.node ?? [], model.opset, (t) => facts.get(t)?.dims);
  for (const [t, dims] of up.shapes) facts.set(t, { dims, kind: 'float' });
  const initializers = [...(original.initializer ?? []), ...up.initializers];
  const graph = indexGraph({ ...original, node: up.nodes, initializer: initializers }, model.path);
  facts.set(model.input.name, { dims: inputDims, kind: 'float' });
  const analysis = analyseModel(graph, facts, model.input.name, model.path);
  const scores = anyScores
    ? { tensor: model.output, source: 'output' as const, numClasses: facts.get(model.output)!.dims.reduce((x, y) => x * y, 1) }
    : findScores(graph, model.output, (t) => facts.get(t)?.dims, model.path);
  const layers = listLayers(analysis, scores.tensor);
  return { model, inputDims, nodes: up.nodes, initializers, opset: Math.max(model.opset, TARGET_OPSET), analysis, scores, layers };
}
