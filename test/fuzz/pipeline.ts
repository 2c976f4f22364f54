/**
 * The path a user's model and image take through the core: load → probe and analyse → layers →
 * a small map request; and decode → preprocess. The bad-input suites and the fuzz harness both
 * drive it, so what they prove holds for the real pipeline (the CLI runs the same calls).
 */
import { Engine } from '../../core/engine/engine';
import { openModel } from '../../core/workflow/open-model';
import { resolveLayer } from '../../core/cli/args';
import { explainMaps, Estimate, Question } from '../../core/methods/maps';
import { decodeImage } from '../../core/image/decode';
import { preprocessImage, PreprocessSpec } from '../../core/image/preprocess';

export interface ModelOutcome {
  layers: number;
  maps: number;
}

/**
 * Requests the fuzz cases cycle through: evidence at the last layer; contrast and detail at the
 * stages; a probe mismatch estimate at the last layer.
 */
const REQUESTS: { layer: string; questions: Question[]; estimate?: Estimate }[] = [
  { layer: 'last', questions: [{ kind: 'evidence', fact: 0 }] },
  { layer: 'stages', questions: [{ kind: 'contrast', fact: 0, foil: 1 }, { kind: 'detail', fact: 0 }] },
  { layer: 'last', questions: [{ kind: 'mismatch', fact: 0 }], estimate: { mode: 'probe', k: 3, seed: 1 } },
];

/** Opens a model as the CLI does and, when `maps`, runs one of REQUESTS (`request`, default 0). */
export async function exerciseModel(engine: Engine, file: string, opts: { maps?: boolean; request?: number } = {}): Promise<ModelOutcome> {
  const ctx = await openModel(engine, file);
  const req = REQUESTS[(opts.request ?? 0) % REQUESTS.length];
  const layers = resolveLayer(ctx.pm, req.layer);
  if (!opts.maps) return { layers: ctx.pm.layers.length, maps: 0 };
  const size = ctx.pm.inputDims.reduce((a, b) => a * b, 1);
  const input = new Float32Array(size).fill(0.25);
  const questions = req.questions.map((q) => ({ ...q, foil: q.foil !== undefined ? Math.min(q.foil, ctx.pm.scores.numClasses - 1) : undefined }));
  const maps = await explainMaps(engine, ctx.pm, input, questions, layers, { estimate: req.estimate });
  return { layers: ctx.pm.layers.length, maps: maps.length };
}

/** The demo model's preprocessing at a small size, for image cases. */
export const SMALL_SPEC: PreprocessSpec = {
  size: [32, 32], resize: 'stretch', channels: 'RGB', layout: 'NCHW', scale: 1 / 255, mean: [0, 0, 0], std: [1, 1, 1],
} as PreprocessSpec;

/** Decodes an image and preprocesses it for a model input. */
export async function exerciseImage(file: string, opts: { maxPixels?: number } = {}): Promise<{ width: number; height: number; note?: string }> {
  const image = await decodeImage(file, { maxPixels: opts.maxPixels });
  const pre = preprocessImage(image, SMALL_SPEC);
  if (pre.data.length !== 3 * 32 * 32) throw new Error(`preprocess gave ${pre.data.length} values`);
  return { width: image.width, height: image.height, note: image.note };
}
