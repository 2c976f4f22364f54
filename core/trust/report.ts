/**
 * The trust-check report: plain JSON (numbers, strings, arrays), the same object the CLI prints
 * with --json and the panel receives. This file imports nothing, so the webview can share it.
 * A figure that is undefined on this image (a rank correlation against a constant map) is null.
 */

/** The checks, DESIGN §4.2. */
export const TRUST_TESTS = ['sanity', 'faithfulness', 'truth', 'robustness'] as const;
export type TrustTest = (typeof TRUST_TESTS)[number];

/**
 * Map kinds the checks can look at: the panel's gradient kinds, plus `gradient`, the plain input
 * gradient saliency max_c |∂z_fact/∂x_c| (Simonyan, Vedaldi & Zisserman, ICLR workshop 2014),
 * which the sanity-check paper tests alongside the others.
 */
export const TRUST_MAP_KINDS = ['evidence', 'contrast', 'detail', 'guided-evidence', 'gradient'] as const;
export type TrustMapKind = (typeof TRUST_MAP_KINDS)[number];

export type PerKind<T> = Partial<Record<TrustMapKind, T>>;

/** One randomization step: which weight blocks are random and each kind's similarity to its original map. */
export interface SanityStep {
  /** Stage ids whose block is random, from the scores downwards. */
  randomized: string[];
  /** Initializers rewritten in this step's model. */
  initializers: number;
  /** The fact's probability under the randomized model. */
  p_fact: number;
  spearman: PerKind<number | null>;
  spearman_abs: PerKind<number | null>;
  ssim: PerKind<number | null>;
  hog: PerKind<number | null>;
  /** Kinds whose map became constant (e.g. all zero after Grad-CAM's ReLU): rank correlation is undefined (null), yet no structure is left. */
  flat: TrustMapKind[];
}

export interface SanityReport {
  seed: number;
  /** The weight blocks, scores side first: the stage each starts at and how many initializers it holds. */
  blocks: { stage: string; initializers: number }[];
  cascade: SanityStep[];
  independent: SanityStep[];
}

/** x: fraction of pixels changed (0 → 1); y: the fact's probability; auc: trapezoid area. */
export interface Curve { x: number[]; y: number[]; auc: number }

export interface FaithfulnessFigures { deletion: Curve; insertion: Curve }

/** Random pixel orders, one per seed: the curves averaged point by point, and each seed's areas. */
export interface RandomFigures extends FaithfulnessFigures { seeds: number[]; deletion_auc: number[]; insertion_auc: number[] }

/** Which random baseline a map is judged against: one of the same smoothness. */
export type RandomBaseline = 'pixels' | 'layer_grid';

export interface FaithfulnessReport {
  /** Input pixels changed between two scored points of a curve. */
  step_pixels: number;
  /** σ of the blur insertion starts from, in input pixels. */
  blur_sigma: number;
  maps: PerKind<FaithfulnessFigures & { baseline: RandomBaseline }>;
  /**
   * Two random baselines. `pixels`: an independent random value per input pixel (for detail,
   * guided-evidence and gradient maps). `layer_grid`: random values on the layer's grid,
   * upsampled bilinearly as Grad-CAM maps are (for evidence and contrast): removing scattered
   * single pixels hurts a CNN differently from removing smooth blobs, so each map is compared
   * with random orders of its own smoothness (this project's choice).
   */
  random: { pixels: RandomFigures; layer_grid: RandomFigures & { grid: [number, number] } };
}

export interface TruthFigures {
  nss: number | null;
  cc: number | null;
  auc_judd: number | null;
  sim: number | null;
  energy_in_mask: number | null;
  pointing_hit: boolean;
}

export interface TruthReport {
  source: 'mask' | 'box';
  /** Share of the image the region covers: the energy a map spread evenly would score. */
  mask_fraction: number;
  pointing_tolerance_px: number;
  maps: PerKind<TruthFigures>;
}

export interface DriftFigures { spearman: number | null; ssim: number | null; pearson: number | null }

export interface RobustnessStep {
  perturbation: 'blur' | 'noise';
  /** Blur σ in input pixels, or noise σ as a fraction of the input's own standard deviation. */
  strength: number;
  /** The fact's probability on the perturbed input. */
  p_fact: number;
  drift: PerKind<DriftFigures>;
}

export interface RobustnessReport { noise_seed: number; steps: RobustnessStep[] }

export const TRUST_REPORT_FORMAT = 'factfoil-trust/1';

export interface TrustReport {
  format: typeof TRUST_REPORT_FORMAT;
  /** The layer evidence, contrast and guided-evidence maps are taken at. */
  layer: string;
  fact: number;
  foil?: number;
  /** The fact's probability on the input as given. */
  p_fact: number;
  kinds: TrustMapKind[];
  seed: number;
  sanity?: SanityReport;
  faithfulness?: FaithfulnessReport;
  truth?: TruthReport;
  robustness?: RobustnessReport;
  /** One-line remarks on how to read this report (e.g. a map that was flat). */
  notes: string[];
}
