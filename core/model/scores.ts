/** The tensor the maps differentiate: the output, or the input of a trailing Softmax/LogSoftmax. */
import { UserError } from '../errors';
import { GraphIndex } from './graph';

export interface ScoresInfo {
  tensor: string;
  /** Why this tensor: 'output' or 'softmax-input'. */
  source: 'output' | 'softmax-input';
  numClasses: number;
}

const PASS_THROUGH = new Set(['Identity', 'Flatten', 'Reshape', 'Squeeze']);

export function findScores(graph: GraphIndex, output: string, shapeOf: (t: string) => number[] | undefined, modelPath: string): ScoresInfo {
  let tensor = output;
  let source: ScoresInfo['source'] = 'output';
  // Walk back through shape-only wrappers to a Softmax/LogSoftmax, if the model ends in one.
  let cursor = output;
  for (let steps = 0; steps < 4; steps++) {
    const p = graph.producer.get(cursor);
    if (!p) break;
    if (p.opType === 'Softmax' || p.opType === 'LogSoftmax') { tensor = p.inputs[0]; source = 'softmax-input'; break; }
    if (!PASS_THROUGH.has(p.opType)) break;
    cursor = p.inputs[0];
  }
  const dims = shapeOf(tensor);
  if (!dims) throw new UserError(`${modelPath}: cannot determine the shape of the scores tensor '${tensor}'`);
  // One axis of R ≥ 2 classes, every other axis of size 1: [1,R], [R], and [1,R,1,1] as convolutional heads leave it.
  const classAxes = dims.filter((d) => d !== 1);
  const numClasses = classAxes.length === 1 ? classAxes[0] : 0;
  if (numClasses < 2) {
    throw new UserError(`${modelPath}: output '${output}' has shape [${dims.join(',')}], not a vector of class scores`, 'the model must output one score per class, shape [1,R]');
  }
  return { tensor, source, numClasses };
}
