/** The trust messages of the panel protocol: well-formed ones pass unchanged, malformed ones are refused naming the field. */
import { strict as assert } from 'node:assert';
import { checkFromWebview, checkToWebview, validateFromWebview, validateToWebview } from '../../webview/protocol';
import type { TrustReport } from '../../core/trust/report';

const curve = (ys: number[]) => ({ x: ys.map((_, i) => i / (ys.length - 1)), y: ys, auc: 0.5 });
const step = (randomized: string[]) => ({
  randomized, initializers: 2, p_fact: 0.2,
  spearman: { evidence: 0.1, detail: 0.9 }, spearman_abs: { evidence: 0.2, detail: 0.9 },
  ssim: { evidence: null, detail: 0.8 }, hog: { evidence: 0.3, detail: 0.7 }, flat: ['evidence' as const],
});

export const SAMPLE_REPORT: TrustReport = {
  format: 'factfoil-trust/1', layer: 'stage4', fact: 1, foil: 2, p_fact: 0.9, kinds: ['evidence', 'detail'], seed: 2018,
  sanity: { seed: 2018, blocks: [{ stage: 'stage4', initializers: 2 }], cascade: [step(['stage4'])], independent: [step(['stage4'])] },
  faithfulness: {
    step_pixels: 10, blur_sigma: 5.6,
    maps: { evidence: { deletion: curve([0.9, 0.1, 0]), insertion: curve([0, 0.8, 0.9]), baseline: 'layer_grid' } },
    random: {
      pixels: { deletion: curve([0.9, 0.5, 0]), insertion: curve([0, 0.4, 0.9]), seeds: [1, 2], deletion_auc: [0.5, 0.5], insertion_auc: [0.4, 0.4] },
      layer_grid: { deletion: curve([0.9, 0.6, 0]), insertion: curve([0, 0.5, 0.9]), seeds: [1, 2], deletion_auc: [0.5, 0.5], insertion_auc: [0.4, 0.4], grid: [7, 7] },
    },
  },
  truth: { source: 'box', mask_fraction: 0.2, pointing_tolerance_px: 15, maps: { evidence: { nss: 1.2, cc: 0.4, auc_judd: 0.8, sim: 0.3, energy_in_mask: 0.6, pointing_hit: true } } },
  robustness: { noise_seed: 7, steps: [{ perturbation: 'blur', strength: 1, p_fact: 0.8, drift: { evidence: { spearman: 0.9, ssim: 0.8, pearson: 0.95 } } }] },
  notes: [],
};

describe('trust messages of the panel protocol', () => {
  const request = { type: 'requestTrust', id: 9, layer: 'stage4', fact: 1, foil: 2, tests: ['sanity', 'faithfulness'], kinds: ['evidence', 'gradient'], box: { x: 1, y: 2, width: 30, height: 40 }, seed: 3 };

  it('accepts a well-formed request, progress and result unchanged', () => {
    assert.deepEqual(validateFromWebview(request), request);
    assert.deepEqual(validateFromWebview({ type: 'requestTrust', id: 1, layer: 'x', fact: 0, tests: ['truth'], maskFile: '/a/m.png' }), { type: 'requestTrust', id: 1, layer: 'x', fact: 0, tests: ['truth'], maskFile: '/a/m.png' });
    const progress = { type: 'trustProgress', id: 9, done: 3, total: 10, message: 'randomizing stage3' };
    assert.deepEqual(validateToWebview(progress), progress);
    const result = { type: 'trustResult', id: 9, report: SAMPLE_REPORT };
    assert.deepEqual(validateToWebview(result), JSON.parse(JSON.stringify(result)));
  });

  it('refuses malformed trust messages, naming the field', () => {
    const bad: [unknown, RegExp, 'from' | 'to'][] = [
      [{ ...request, tests: [] }, /tests: array length 0/, 'from'],
      [{ ...request, tests: ['vibes'] }, /tests\[0\]: expected one of/, 'from'],
      [{ ...request, kinds: ['mismatch'] }, /kinds\[0\]/, 'from'],
      [{ ...request, maskFile: '/m.png' }, /a box or a mask file, not both/, 'from'],
      [{ ...request, box: { x: 0, y: 0, width: 0, height: 4 } }, /box\.width/, 'from'],
      [{ type: 'trustProgress', id: 1, done: 5, total: 4 }, /done 5 > total 4/, 'to'],
      [{ type: 'trustResult', id: 1, report: { ...SAMPLE_REPORT, format: 'other/1' } }, /report\.format/, 'to'],
      [{ type: 'trustResult', id: 1, report: { ...SAMPLE_REPORT, kinds: ['heat'] } }, /report\.kinds\[0\]/, 'to'],
      [{ type: 'trustResult', id: 1, report: { ...SAMPLE_REPORT, sanity: { ...SAMPLE_REPORT.sanity!, cascade: [{ ...step([]), spearman: { heat: 1 } }] } } }, /cascade\[0\]\.spearman\.heat: unexpected key/, 'to'],
      [{ type: 'trustResult', id: 1, report: { ...SAMPLE_REPORT, sanity: { ...SAMPLE_REPORT.sanity!, cascade: [{ ...step([]), ssim: { detail: 2 } }] } } }, /ssim\.detail: 2 outside/, 'to'],
      [{ type: 'trustResult', id: 1, report: { ...SAMPLE_REPORT, faithfulness: { ...SAMPLE_REPORT.faithfulness!, maps: { evidence: { deletion: { x: [0, 1], y: [1], auc: 0.5 }, insertion: curve([0, 1]), baseline: 'pixels' } } } } }, /x has 2 points, y 1/, 'to'],
      [{ type: 'trustResult', id: 1, report: { ...SAMPLE_REPORT, extra: true } }, /report\.extra: unexpected field/, 'to'],
    ];
    for (const [m, why, dir] of bad) {
      const r = dir === 'from' ? checkFromWebview(m) : checkToWebview(m);
      assert.ok(!r.ok && why.test(r.reason), `${JSON.stringify(m).slice(0, 100)} → ${!r.ok ? r.reason : 'accepted'}`);
    }
  });
});
