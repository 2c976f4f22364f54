/** What every trust check looks at: one model, one preprocessed input, one question, one layer. */
import { Engine } from '../engine/engine';
import { explainMaps, Question } from '../methods/maps';
import { gradientsAt, lossSeed } from '../methods/gradient';
import { PreparedModel } from '../plan/prepared';
import { UserError } from '../errors';
import { InputLayout } from '../metrics/input-layout';
import { TrustMapKind } from './report';

export interface TrustSubject {
  engine: Engine;
  pm: PreparedModel;
  /** Preprocessed input, batch 1, in the model's layout. */
  input: Float32Array;
  fact: number;
  /** For contrast maps. */
  foil: number;
  /** The layer evidence, contrast and guided-evidence maps are taken at. */
  layer: string;
  layout: InputLayout;
  signal?: AbortSignal;
}

export interface InputGeometry { width: number; height: number; channels: number; layout: InputLayout }

/** Width, height, channels of a batch-1 image input [1,C,H,W] or [1,H,W,C] in the given layout. */
export function inputGeometry(pm: PreparedModel, layout: InputLayout): InputGeometry {
  const d = pm.inputDims;
  if (d.length !== 4 || d[0] !== 1) throw new UserError(`${pm.model.path}: the trust checks need a [1,C,H,W] or [1,H,W,C] image input, got [${d.join(',')}]`);
  return layout === 'NCHW' ? { channels: d[1], height: d[2], width: d[3], layout } : { height: d[1], width: d[2], channels: d[3], layout };
}

/** Stops the work with a user-facing error when the caller has cancelled. */
export function throwIfAborted(signal?: AbortSignal): void {
  if (signal?.aborted) throw new UserError('cancelled');
}

/**
 * The maps of the given kinds for the subject's question, each at input resolution: Grad-CAM
 * kinds upsampled from the layer (the `up` grid), detail and gradient at the input itself.
 */
export async function mapsAtInput(s: TrustSubject, kinds: readonly TrustMapKind[], input = s.input, pm = s.pm, engine = s.engine): Promise<Map<TrustMapKind, Float32Array>> {
  throwIfAborted(s.signal);
  const out = new Map<TrustMapKind, Float32Array>();
  const questions: Question[] = kinds.filter((k) => k !== 'gradient')
    .map((kind) => ({ kind: kind as Question['kind'], fact: s.fact, ...(kind === 'contrast' ? { foil: s.foil } : {}) }));
  if (questions.length) {
    for (const r of await explainMaps(engine, pm, input, questions, [s.layer], { signal: s.signal })) {
      const k = r.question.kind as TrustMapKind;
      if (!out.has(k)) out.set(k, r.up.data);
    }
  }
  if (kinds.includes('gradient')) out.set('gradient', await gradientSaliency(engine, pm, input, s.fact, s.layout));
  return out;
}

/**
 * Input-gradient saliency (Simonyan, Vedaldi & Zisserman, ICLR workshop 2014):
 * map(i,j) = max_c |∂z_fact/∂x_c(i,j)|.
 */
export async function gradientSaliency(engine: Engine, pm: PreparedModel, input: Float32Array, fact: number, layout: InputLayout): Promise<Float32Array> {
  const x = pm.model.input.name;
  const g = (await gradientsAt(engine, pm, input, [x], lossSeed(pm.scores.numClasses, fact, 'logit'))).get(x)!.data;
  const { width, height, channels } = inputGeometry(pm, layout);
  const pixels = width * height;
  const map = new Float32Array(pixels);
  for (let p = 0; p < pixels; p++) {
    let m = 0;
    for (let c = 0; c < channels; c++) m = Math.max(m, Math.abs(g[layout === 'NCHW' ? c * pixels + p : p * channels + c]));
    map[p] = m;
  }
  return map;
}

/** Softmax of the scores (numerically stable: max subtracted first). */
export function softmax(z: ArrayLike<number>): Float64Array {
  let m = -Infinity;
  for (let i = 0; i < z.length; i++) m = Math.max(m, z[i]);
  const p = new Float64Array(z.length);
  let s = 0;
  for (let i = 0; i < z.length; i++) s += p[i] = Math.exp(z[i] - m);
  for (let i = 0; i < z.length; i++) p[i] /= s;
  return p;
}

/** The fact's softmax probability on one input. */
export async function factProbability(engine: Engine, pm: PreparedModel, input: Float32Array, fact: number): Promise<number> {
  return softmax(await engine.scores(pm, input))[fact];
}

/** A JSON-safe figure: NaN and ±∞ (undefined on this input) become null. */
export function finiteOrNull(v: number): number | null {
  return Number.isFinite(v) ? v : null;
}

/** Clamp rounding noise into [0, 1] (probabilities, areas). */
export function unit(v: number): number {
  return Math.min(1, Math.max(0, v));
}
