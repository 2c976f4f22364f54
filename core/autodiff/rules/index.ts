/** The registry: every op with a gradient rule. Adding an op is one file (or entry) and one line here. */
import { GradientRule } from '../rule';
import { activationRules } from './activation';
import { arithmeticRules } from './arithmetic';
import { convRules } from './conv';
import { matmulRules } from './matmul';
import { poolRules } from './pool';
import { normalizationRules } from './normalization';
import { softmaxRules } from './softmax';
import { reduceRules } from './reduce';
import { layoutRules } from './layout';
import { indexingRules } from './indexing';
import { quantizeRules } from './quantize';

export const gradientRules: Readonly<Record<string, GradientRule>> = {
  ...activationRules, ...arithmeticRules, ...convRules, ...matmulRules, ...poolRules,
  ...normalizationRules, ...softmaxRules, ...reduceRules, ...layoutRules, ...indexingRules, ...quantizeRules,
};

export function hasGradientRule(opType: string, domain = ''): boolean {
  return (domain === '' || domain === 'ai.onnx') && opType in gradientRules;
}
