/** Folder summaries: mean and sample sd per figure and kind, worked by hand; undefined figures skipped, not zeroed. */
import { strict as assert } from 'node:assert';
import { summarizeReports, summaryJson } from '../../../core/trust/summary';
import { SAMPLE_REPORT } from '../../webview/trust-protocol.test';
import type { TrustReport } from '../../../core/trust/report';

describe('summarizeReports', () => {
  it('averages figures per kind across images with the sample sd, skipping nulls', () => {
    const a: TrustReport = structuredClone(SAMPLE_REPORT);
    const b: TrustReport = structuredClone(SAMPLE_REPORT);
    b.sanity!.cascade[0].spearman = { evidence: 0.5, detail: 0.7 };
    b.sanity!.cascade[0].ssim = { evidence: 0.2, detail: 0.6 };
    b.faithfulness!.maps.evidence!.deletion.auc = 0.3;
    const s = summarizeReports([a, b]);
    assert.equal(s.images, 2);
    const sp = s.sanity!.cascade[0].spearman;
    // evidence ρ: 0.1 and 0.5 → mean 0.3, sample sd √((0.2² + 0.2²)/1) = 0.2828…
    assert.ok(Math.abs(sp.evidence!.mean - 0.3) < 1e-12 && Math.abs(sp.evidence!.sd - Math.sqrt(0.08)) < 1e-12);
    assert.ok(Math.abs(sp.detail!.mean - 0.8) < 1e-12);
    // SSIM of evidence: null on image a, 0.2 on b → n 1, one skipped, sd undefined.
    const ss = s.sanity!.cascade[0].ssim.evidence!;
    assert.deepEqual([ss.mean, ss.n, ss.skipped], [0.2, 1, 1]);
    assert.ok(Math.abs(s.faithfulness!.deletion_auc.evidence!.mean - 0.4) < 1e-12);
    assert.equal(s.truth!.pointing_hit && (s.truth!.pointing_hit as Record<string, { mean: number }>).evidence.mean, 1);
    const json = summaryJson(s) as { sanity: { cascade: { ssim: { evidence: { sd: unknown } } }[] } };
    assert.equal(json.sanity.cascade[0].ssim.evidence.sd, null, 'NaN written as null');
  });
});
