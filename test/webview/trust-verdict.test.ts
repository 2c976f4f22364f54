/**
 * Verdicts of the trust checks on worked examples. The faithfulness rule is the deletion /
 * insertion metric's own reading (a map's order must remove the evidence faster than a random
 * order: lower deletion area, higher insertion area); the margins and correlation thresholds are
 * rules of thumb (common practice, no source). The first case is the demo image:
 * deletion areas evidence 0.15 and contrast 0.10 against random 0.06.
 */
import { strict as assert } from 'node:assert';
import type { TrustReport } from '../../core/trust/report';
import { faithfulnessVerdict, robustnessVerdict, sanityVerdict, truthVerdict } from '../../webview/trust-verdict';

const curve = (auc: number) => ({ x: [0, 1], y: [1, 0], auc });
const random = (del: number, ins: number) => ({ deletion: curve(del), insertion: curve(ins), seeds: [1], deletion_auc: [del], insertion_auc: [ins] });

function report(over: Partial<TrustReport>): TrustReport {
  return { format: 'factfoil-trust/1', layer: 'stage4', fact: 0, p_fact: 0.6, kinds: ['evidence', 'contrast'], seed: 1, notes: [], ...over };
}

function faith(maps: Record<string, [number, number]>, base: [number, number]): TrustReport {
  return report({
    kinds: Object.keys(maps) as TrustReport['kinds'],
    faithfulness: {
      step_pixels: 1, blur_sigma: 4,
      maps: Object.fromEntries(Object.entries(maps).map(([k, [d, i]]) => [k, { deletion: curve(d), insertion: curve(i), baseline: 'pixels' as const }])),
      random: { pixels: random(...base), layer_grid: { ...random(...base), grid: [7, 7] } },
    },
  });
}

describe('trust verdicts', () => {
  it('fails faithfulness when deletion areas are worse than random (the issue\'s demo numbers)', () => {
    const v = faithfulnessVerdict(faith({ evidence: [0.15, 0.4], contrast: [0.10, 0.4] }, [0.06, 0.3]))!;
    assert.equal(v.verdict, 'failed');
    assert.match(v.lines[0], /^evidence: failed — deletion 0\.15 vs random 0\.06 \(worse than random\)/);
    assert.match(v.rule, /common practice, no source/);
  });

  it('passes faithfulness only when both areas beat random by the margin, doubtful in between', () => {
    assert.equal(faithfulnessVerdict(faith({ evidence: [0.10, 0.60] }, [0.30, 0.40]))!.verdict, 'passed');
    // deletion better by 0.02 only: barely better than random
    const thin = faithfulnessVerdict(faith({ evidence: [0.28, 0.60] }, [0.30, 0.40]))!;
    assert.equal(thin.verdict, 'doubtful');
    assert.match(thin.lines[0], /barely better than random/);
    // a layer map against the smooth (grid) baseline: beating it but not the per-pixel order is doubtful
    const grid = faith({ evidence: [0.15, 0.6] }, [0.30, 0.40]);
    grid.faithfulness!.maps.evidence!.baseline = 'layer_grid';
    grid.faithfulness!.random.pixels = { ...random(0.06, 0.4) };
    const g = faithfulnessVerdict(grid)!;
    assert.equal(g.verdict, 'doubtful');
    assert.match(g.lines[0], /vs random \(grid\) 0\.30 .*not below the per-pixel random order's 0\.06/);
    // one kind passes, one fails: the set is doubtful
    assert.equal(faithfulnessVerdict(faith({ evidence: [0.10, 0.60], contrast: [0.35, 0.60] }, [0.30, 0.40]))!.verdict, 'doubtful');
  });

  it('sanity: the map must change once the weights are random', () => {
    const step = (spearman: Record<string, number | null>, flat: TrustReport['kinds'] = []) => ({
      randomized: ['logits', 'stage4'], initializers: 2, p_fact: 0.2, spearman, spearman_abs: spearman, ssim: {}, hog: {}, flat,
    });
    const r = (last: ReturnType<typeof step>) => report({ sanity: { seed: 1, blocks: [], cascade: [step({ evidence: 0.9, contrast: 0.9 }), last], independent: [] } });
    assert.equal(sanityVerdict(r(step({ evidence: 0.1, contrast: -0.2 })))!.verdict, 'passed');
    assert.equal(sanityVerdict(r(step({ evidence: 0.95, contrast: 0.85 })))!.verdict, 'failed');
    assert.equal(sanityVerdict(r(step({ evidence: 0.6, contrast: 0.65 })))!.verdict, 'doubtful');
    // a map that went flat changed completely
    assert.equal(sanityVerdict(r(step({ evidence: null, contrast: 0.1 }, ['evidence'])))!.verdict, 'passed');
  });

  it('truth: NSS and AUC-Judd against their chance levels (0 and 0.5 by definition)', () => {
    const t = (nss: number, auc: number) => report({ kinds: ['evidence'], truth: { source: 'box', mask_fraction: 0.2, pointing_tolerance_px: 15, maps: { evidence: { nss, cc: 0, auc_judd: auc, sim: 0, energy_in_mask: 0.2, pointing_hit: true } } } });
    assert.equal(truthVerdict(t(1.2, 0.8))!.verdict, 'passed');
    assert.equal(truthVerdict(t(-0.3, 0.4))!.verdict, 'failed');
    assert.equal(truthVerdict(t(0.2, 0.45))!.verdict, 'doubtful');
  });

  it('robustness: judged at the mildest blur and noise', () => {
    const step = (perturbation: 'blur' | 'noise', strength: number, spearman: number) => ({ perturbation, strength, p_fact: 0.6, drift: { evidence: { spearman, ssim: null, pearson: null } } });
    const r = (...steps: ReturnType<typeof step>[]) => report({ kinds: ['evidence'], robustness: { noise_seed: 1, steps } });
    // strong perturbations may move the map; only the mildest count
    assert.equal(robustnessVerdict(r(step('blur', 1, 0.9), step('blur', 4, 0.2), step('noise', 0.05, 0.8)))!.verdict, 'passed');
    assert.equal(robustnessVerdict(r(step('blur', 1, 0.3), step('noise', 0.05, 0.8)))!.verdict, 'failed');
    assert.equal(robustnessVerdict(r(step('blur', 1, 0.5)))!.verdict, 'doubtful');
  });
});
