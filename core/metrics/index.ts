export type { NumericArray } from './checks';
export { pearson, spearman, spearmanAbs, averageRanks } from './correlation';
export { ssim } from './ssim';
export type { SsimOptions } from './ssim';
export { mulberry32, randomMap, gaussianSampler, addGaussianNoise } from './random';
export { gaussianBlurInput } from './blur';
export type { InputLayout } from './input-layout';
