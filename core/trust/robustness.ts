/**
 * Robustness: the same question asked of the input under Gaussian blur and Gaussian noise of
 * increasing strength, each map compared with the clean one (mapDrift: Spearman, SSIM, Pearson).
 * A map that moves a lot under perturbations the prediction survives is not describing the
 * model's decision. Perturbations act in the model's input space.
 */
import { addGaussianNoise, gaussianBlurInput, mapDrift } from '../metrics';
import { RobustnessReport, RobustnessStep, TrustMapKind } from './report';
import { factProbability, finiteOrNull, inputGeometry, mapsAtInput, TrustSubject, unit } from './subject';

export interface RobustnessOptions {
  kinds: readonly TrustMapKind[];
  /** Blur σ in input pixels. Default 0.5, 1, 2, 4 (this project's choice: up to where a 112 px part loses its edges). */
  blurSigmas?: number[];
  /** Noise σ as a fraction of the input's standard deviation. Default 0.05, 0.1, 0.2, 0.4 (this project's choice). */
  noiseSigmas?: number[];
  seed: number;
  maps?: Map<TrustMapKind, Float32Array>;
  onStep?: (message: string) => void;
}

export const DEFAULT_BLUR_SIGMAS = [0.5, 1, 2, 4];
export const DEFAULT_NOISE_SIGMAS = [0.05, 0.1, 0.2, 0.4];

export async function robustnessCheck(s: TrustSubject, opts: RobustnessOptions): Promise<RobustnessReport> {
  const { width, height, channels, layout } = inputGeometry(s.pm, s.layout);
  const clean = opts.maps ?? (await mapsAtInput(s, opts.kinds));
  const sd = standardDeviation(s.input);
  const cases = [
    ...(opts.blurSigmas ?? DEFAULT_BLUR_SIGMAS).map((g) => ({ perturbation: 'blur' as const, strength: g, make: () => gaussianBlurInput(s.input, width, height, channels, layout, g) })),
    ...(opts.noiseSigmas ?? DEFAULT_NOISE_SIGMAS).map((g, i) => ({ perturbation: 'noise' as const, strength: g, make: () => addGaussianNoise(s.input, g * sd, (opts.seed + i) >>> 0) })),
  ];
  const steps: RobustnessStep[] = [];
  for (const c of cases) {
    const input = c.make();
    const maps = await mapsAtInput(s, opts.kinds, input);
    const drift: RobustnessStep['drift'] = {};
    for (const k of opts.kinds) {
      const d = mapDrift(clean.get(k)!, maps.get(k)!, width, height);
      drift[k] = { spearman: finiteOrNull(d.spearman), ssim: finiteOrNull(d.ssim), pearson: finiteOrNull(d.pearson) };
    }
    steps.push({ perturbation: c.perturbation, strength: c.strength, p_fact: unit(await factProbability(s.engine, s.pm, input, s.fact)), drift });
    opts.onStep?.(`robustness: ${c.perturbation} ${c.strength}`);
  }
  return { noise_seed: opts.seed, steps };
}

function standardDeviation(a: Float32Array): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m += a[i];
  m /= a.length;
  let v = 0;
  for (let i = 0; i < a.length; i++) v += (a[i] - m) ** 2;
  return Math.sqrt(v / a.length);
}
