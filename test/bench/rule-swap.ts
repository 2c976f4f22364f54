/** Gradient rules swapped in for one build (bench and tests only): A/B of backward forms. */
import { gradientRules } from '../../core/autodiff/rules';
import { GradientRule } from '../../core/autodiff/rule';

/** Runs `fn` with the registry's rules for the given ops replaced, then restores them. */
export async function withRules<T>(overrides: Record<string, GradientRule>, fn: () => Promise<T>): Promise<T> {
  const rules = gradientRules as Record<string, GradientRule>;
  const saved = Object.fromEntries(Object.keys(overrides).map((op) => [op, rules[op]]));
  Object.assign(rules, overrides);
  try { return await fn(); } finally { Object.assign(rules, saved); }
}
