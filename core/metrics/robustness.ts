import { NumericArray, requireSameLength } from './checks';
import { pearson, spearman } from './correlation';
import { ssim } from './ssim';

/** How far a map moved under an input perturbation: 1 everywhere means it did not move. */
export interface MapDrift {
  spearman: number;
  ssim: number;
  pearson: number;
}

/**
 * Similarity of the map of a perturbed (noisy or blurred) input to the clean input's map, both
 * w×h, by the measures of the sanity check: Spearman rank correlation, SSIM and Pearson.
 */
export function mapDrift(clean: NumericArray, perturbed: NumericArray, w: number, h: number): MapDrift {
  requireSameLength(clean, perturbed, 'mapDrift');
  return { spearman: spearman(clean, perturbed), ssim: ssim(clean, perturbed, w, h), pearson: pearson(clean, perturbed) };
}
