/**
 * The sanity check by weight randomization (Adebayo et al., NeurIPS 2018): maps that do not
 * change when the model's learned weights are destroyed cannot be explaining the model.
 * Cascading randomization goes from the scores downwards, one stage block at a time, keeping
 * the blocks above random; independent randomization destroys one block alone. After each step
 * every map kind is compared with its original by Spearman rank correlation (of the map and of
 * its absolute value), SSIM and HOG-feature Pearson correlation — the paper's four measures.
 */
import { Engine } from '../engine/engine';
import { hogPearson, spearman, spearmanAbs, ssim } from '../metrics';
import { prepareRandomized, randomizedModel, stageWeightBlocks, WeightBlock } from './randomize';
import { SanityReport, SanityStep, TrustMapKind } from './report';
import { factProbability, finiteOrNull, inputGeometry, mapsAtInput, throwIfAborted, TrustSubject, unit } from './subject';

export interface SanityOptions {
  kinds: readonly TrustMapKind[];
  seed: number;
  /** Cascade through at most this many blocks from the scores (default all). */
  depth?: number;
  /** Randomize each of the first `independent` blocks from the scores on its own (default all; 0 for none). */
  independent?: number;
  /** The maps of the trained model, when already computed. */
  original?: Map<TrustMapKind, Float32Array>;
  /** Called after each step with a one-line description. */
  onStep?: (message: string) => void;
}

/** The number of randomized models a sanity check with these options builds (for progress). */
export function sanitySteps(blocks: number, opts: Pick<SanityOptions, 'depth' | 'independent'>): { cascade: number; independent: number } {
  return { cascade: Math.min(opts.depth ?? blocks, blocks), independent: Math.min(opts.independent ?? blocks, blocks) };
}

export async function sanityCheck(s: TrustSubject, opts: SanityOptions): Promise<SanityReport> {
  const blocks = stageWeightBlocks(s.pm);
  const original = opts.original ?? (await mapsAtInput(s, opts.kinds));
  const { width, height } = inputGeometry(s.pm, s.layout);
  // Randomized models get their own engine, so their sessions neither evict the caller's warm
  // ones nor stay cached after the check.
  const scratch = new Engine(s.engine.options, 3);
  try {
    const step = async (chosen: WeightBlock[]): Promise<SanityStep> => {
      throwIfAborted(s.signal);
      const names = chosen.flatMap((b) => b.initializers);
      const pm = prepareRandomized(s.pm, randomizedModel(s.pm.model, names, opts.seed));
      const maps = await mapsAtInput(s, opts.kinds, s.input, pm, scratch);
      const r: SanityStep = {
        randomized: chosen.map((b) => b.stage), initializers: names.length,
        p_fact: unit(await factProbability(scratch, pm, s.input, s.fact)),
        spearman: {}, spearman_abs: {}, ssim: {}, hog: {}, flat: [],
      };
      for (const k of opts.kinds) {
        const a = original.get(k)!;
        const b = maps.get(k)!;
        r.spearman[k] = finiteOrNull(spearman(a, b));
        r.spearman_abs[k] = finiteOrNull(spearmanAbs(a, b));
        r.ssim[k] = finiteOrNull(ssim(a, b, width, height));
        r.hog[k] = finiteOrNull(hogPearson(a, b, width, height));
        if (isConstant(b)) r.flat.push(k);
      }
      return r;
    };

    const n = sanitySteps(blocks.length, opts);
    const cascade: SanityStep[] = [];
    for (let i = 1; i <= n.cascade; i++) {
      cascade.push(await step(blocks.slice(0, i)));
      opts.onStep?.(`sanity: randomized ${blocks.slice(0, i).map((b) => b.stage).join(', ')}`);
    }
    const independent: SanityStep[] = [];
    for (let i = 0; i < n.independent; i++) {
      independent.push(await step([blocks[i]]));
      opts.onStep?.(`sanity: randomized ${blocks[i].stage} alone`);
    }
    return { seed: opts.seed, blocks: blocks.map((b) => ({ stage: b.stage, initializers: b.initializers.length })), cascade, independent };
  } finally {
    await scratch.dispose();
  }
}

function isConstant(a: ArrayLike<number>): boolean {
  for (let i = 1; i < a.length; i++) if (a[i] !== a[0]) return false;
  return true;
}
