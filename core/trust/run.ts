/**
 * One entry for every trust check (DESIGN §4.2): the CLI and the engine process both call
 * runTrustChecks and get the same plain JSON report. The trained model's maps are computed once
 * and shared by the checks; each check reports its progress on one common scale.
 */
import { Engine } from '../engine/engine';
import { UserError } from '../errors';
import { Geometry } from '../image/preprocess';
import { InputLayout } from '../metrics/input-layout';
import { PreparedModel } from '../plan/prepared';
import { faithfulnessCheck, faithfulnessOrders, DEFAULT_FAITHFULNESS_STEPS, DEFAULT_RANDOM_ORDERS } from './faithfulness';
import { stageWeightBlocks } from './randomize';
import { DEFAULT_BLUR_SIGMAS, DEFAULT_NOISE_SIGMAS, robustnessCheck } from './robustness';
import { sanityCheck, sanitySteps } from './sanity';
import { Box, boxRegion, readMask, Region, truthScores } from './truth';
import { TRUST_MAP_KINDS, TRUST_REPORT_FORMAT, TRUST_TESTS, TrustMapKind, TrustReport, TrustTest } from './report';
import { inputGeometry, mapsAtInput, softmax, TrustSubject, unit } from './subject';

export interface TrustInput {
  /** The preprocessed input, batch 1, in the model's layout. */
  data: Float32Array;
  /** Default: channels first when the second axis has at most 4 entries. */
  layout?: InputLayout;
  /** How input pixels map to the original image; absent for tensor inputs (the region is then at input size). */
  geometry?: Geometry;
}

export interface TrustOptions {
  /** Default: all checks, less `truth` when no region is given. */
  tests?: readonly TrustTest[];
  /** Default: every kind in TRUST_MAP_KINDS. */
  kinds?: readonly TrustMapKind[];
  /** Layer of the Grad-CAM kinds. Default: the deepest explainable stage (the usual Grad-CAM layer). */
  layer?: string;
  /** Default: the top prediction. */
  fact?: number;
  /** For contrast maps. Default: the most probable other class. */
  foil?: number;
  /** The object or defect, for `truth` (see regionFor). */
  region?: Region;
  /** Seed of every random choice (weights, random orders, noise). Default 2018. */
  seed?: number;
  sanity?: { depth?: number; independent?: number };
  faithfulness?: { steps?: number; blurSigma?: number; randomOrders?: number };
  robustness?: { blurSigmas?: number[]; noiseSigmas?: number[] };
  pointingTolerancePx?: number;
}

/** done and total on one scale (randomized models, perturbed inputs, curves), with what is running. */
export type TrustProgress = (done: number, total: number, message: string) => void;

export const DEFAULT_TRUST_SEED = 2018;

/** The region from a box or a mask file, at the original image's size (or the input's for tensor inputs). */
export async function regionFor(spec: { box?: Box; maskFile?: string }, size: { width: number; height: number }): Promise<Region | undefined> {
  if (spec.box && spec.maskFile) throw new UserError('give a mask or a box, not both');
  if (spec.maskFile) return readMask(spec.maskFile, size.width, size.height);
  if (spec.box) return boxRegion(spec.box, size.width, size.height);
  return undefined;
}

/**
 * Every kind the model supports: input-resolution kinds (detail, guided-evidence, gradient) need
 * gradients down to the input, which an op without a gradient rule below some layer blocks.
 */
export function defaultTrustKinds(pm: PreparedModel): TrustMapKind[] {
  const inputReached = !pm.layers.some((l) => l.blockedBy);
  return TRUST_MAP_KINDS.filter((k) => inputReached || k === 'evidence' || k === 'contrast');
}

/** The layer trust checks use by default: the deepest explainable stage, else the deepest explainable layer. */
export function defaultTrustLayer(pm: PreparedModel): string {
  const ok = pm.layers.filter((l) => !l.blockedBy);
  const stage = ok.filter((l) => l.isStage).at(-1) ?? ok.at(-1);
  if (!stage) throw new UserError(`${pm.model.path} has no explainable layer`, 'run `factfoil layers <model>` to see why');
  return stage.id;
}

export async function runTrustChecks(
  engine: Engine, pm: PreparedModel, input: TrustInput, options: TrustOptions = {},
  onProgress?: TrustProgress, signal?: AbortSignal,
): Promise<TrustReport> {
  const tests = [...new Set(options.tests ?? TRUST_TESTS.filter((t) => t !== 'truth' || options.region))];
  for (const t of tests) if (!TRUST_TESTS.includes(t)) throw new UserError(`unknown trust check '${t}'`, `choose from ${TRUST_TESTS.join(', ')}`);
  if (tests.includes('truth') && !options.region) throw new UserError('the truth check needs the object region', 'give a mask image (--mask) or a box (--box x,y,w,h)');
  const kinds = [...new Set(options.kinds ?? defaultTrustKinds(pm))];
  for (const k of kinds) if (!TRUST_MAP_KINDS.includes(k)) throw new UserError(`map kind '${k}' is not checked for trust`, `choose from ${TRUST_MAP_KINDS.join(', ')}`);
  if (!kinds.length) throw new UserError('no map kind to check');
  const seed = (options.seed ?? DEFAULT_TRUST_SEED) >>> 0;
  const layout = input.layout ?? (pm.inputDims[1] <= 4 ? 'NCHW' : 'NHWC');
  const size = inputGeometry(pm, layout);
  if (input.data.length !== size.width * size.height * size.channels) {
    throw new UserError(`the input has ${input.data.length} values but ${pm.model.path} takes [${pm.inputDims.join(',')}]`);
  }
  const layer = options.layer ?? defaultTrustLayer(pm);
  const p = softmax(await engine.scores(pm, input.data));
  const R = p.length;
  const byP = [...p.keys()].sort((a, b) => p[b] - p[a]);
  const fact = options.fact ?? byP[0];
  const foil = options.foil ?? byP.find((i) => i !== fact) ?? fact;
  for (const [what, c] of [['fact', fact], ['foil', foil]] as const) {
    if (!Number.isInteger(c) || c < 0 || c >= R) throw new UserError(`${what} class ${c} is outside the model's ${R} classes`);
  }
  if (kinds.includes('contrast') && foil === fact) throw new UserError('a contrast map needs a foil other than the fact', 'pass another --foil, or leave contrast out of --map');

  const s: TrustSubject = { engine, pm, input: input.data, fact, foil, layer, layout, signal };
  // One shared scale: the original maps, each randomized model, each perturbed input, each curve.
  const blocks = tests.includes('sanity') ? stageWeightBlocks(pm).length : 0;
  const san = sanitySteps(blocks, options.sanity ?? {});
  const orders = options.faithfulness?.randomOrders ?? DEFAULT_RANDOM_ORDERS;
  const perturbations = (options.robustness?.blurSigmas ?? DEFAULT_BLUR_SIGMAS).length + (options.robustness?.noiseSigmas ?? DEFAULT_NOISE_SIGMAS).length;
  const total = 1 + (tests.includes('sanity') ? san.cascade + san.independent : 0)
    + (tests.includes('faithfulness') ? faithfulnessOrders(kinds.length, orders) : 0) + (tests.includes('robustness') ? perturbations : 0) + (tests.includes('truth') ? 1 : 0);
  let done = 0;
  const tick = (message: string, n = 1): void => { done += n; onProgress?.(Math.min(done, total), total, message); };
  onProgress?.(0, total, 'maps of the trained model');

  const maps = await mapsAtInput(s, kinds);
  tick('maps of the trained model');
  const notes: string[] = [];
  for (const k of kinds) if (isConstant(maps.get(k)!)) notes.push(`the ${k} map is constant on this image: its rank figures are undefined (null)`);

  const report: TrustReport = { format: TRUST_REPORT_FORMAT, layer, fact, ...(kinds.includes('contrast') ? { foil } : {}), p_fact: unit(p[fact]), kinds, seed, notes };
  if (tests.includes('truth')) {
    report.truth = truthScores(maps, size, options.region!, input.geometry, options.pointingTolerancePx);
    if (report.truth.mask_fraction > 0.5) notes.push(`the region covers ${(100 * report.truth.mask_fraction).toFixed(0)}% of the image: localisation scores say little`);
    tick('scores against the region');
  }
  if (tests.includes('faithfulness')) {
    const base = done;
    const f = options.faithfulness ?? {};
    report.faithfulness = await faithfulnessCheck(s, {
      kinds, seed, maps, steps: f.steps ?? DEFAULT_FAITHFULNESS_STEPS, blurSigma: f.blurSigma,
      randomSeeds: Array.from({ length: orders }, (_, i) => (seed + 1000 * (i + 1)) >>> 0),
      onProgress: (d, t) => onProgress?.(base + (faithfulnessOrders(kinds.length, orders) * d) / t, total, 'deletion and insertion'),
    });
    done = base;
    tick('deletion and insertion', faithfulnessOrders(kinds.length, orders));
  }
  if (tests.includes('robustness')) {
    report.robustness = await robustnessCheck(s, { kinds, seed, maps, ...options.robustness, onStep: (m) => tick(m) });
  }
  if (tests.includes('sanity')) {
    report.sanity = await sanityCheck(s, { kinds, seed, original: maps, ...options.sanity, onStep: (m) => tick(m) });
  }
  return report;
}

function isConstant(a: ArrayLike<number>): boolean {
  for (let i = 1; i < a.length; i++) if (a[i] !== a[0]) return false;
  return true;
}
