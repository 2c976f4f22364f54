/**
 * Do the maps point at the part? On the demo model's evaluation set (64 rendered images with
 * exact object masks, test-fixtures/parts/eval*), the evidence for the expected class and the
 * mismatch map must put at least 1.5× as much of their mass on the part as a uniform map would
 * (a uniform map's energy inside the mask equals the mask's area fraction), and rank part pixels above
 * belt pixels (pixel AUC-Judd > 0.5, chance level). These are "better than chance" checks —
 * common practice, no source for the thresholds; the measured figures print with
 * FACTFOIL_VERBOSE=1.
 */
import { strict as assert } from 'node:assert';
import { readdirSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps, Question } from '../../../core/methods/maps';
import { openModel } from '../../../core/workflow/open-model';
import { imageInput } from '../../../core/workflow/model-input';
import { decodeMask } from '../../../core/image/decode';
import { aucJudd, energyInMask } from '../../../core/metrics/ground-truth';
import { FIXTURES } from '../../helpers';

const PARTS = path.join(FIXTURES, 'parts');
const LAYERS = ['stage2', 'stage3', 'stage4'];

function mean(xs: number[]): number { return xs.reduce((a, b) => a + b, 0) / xs.length; }

describe('localisation on the demo evaluation set', function () {
  this.timeout(120_000);
  const engine = new Engine();
  after(() => engine.dispose());

  it('evidence and mismatch maps concentrate on the part at every deep stage', async () => {
    const ctx = await openModel(engine, path.join(PARTS, 'parts-sorter.onnx'));
    const area: number[] = [];
    const scores = new Map<string, { energy: number[]; auc: number[] }>();
    const put = (key: string, energy: number, auc: number) => {
      const s = scores.get(key) ?? { energy: [], auc: [] };
      s.energy.push(energy); s.auc.push(auc); scores.set(key, s);
    };
    for (const label of readdirSync(path.join(PARTS, 'eval')).sort()) {
      for (const name of readdirSync(path.join(PARTS, 'eval', label)).sort()) {
        const input = await imageInput(ctx, path.join(PARTS, 'eval', label, name));
        const fact = ctx.labels.indexOf(label);
        assert.ok(fact >= 0, `${label} is not a label`);
        // The images are 112×112 and preprocessing is a plain stretch to 112×112, so the
        // upsampled map and the mask share one pixel grid.
        const [, , H, W] = ctx.pm.inputDims;
        assert.equal(input.image!.width, W);
        const mask = await decodeMask(path.join(PARTS, 'eval-masks', label, name), W, H);
        area.push(mask.reduce((a, b) => a + b, 0) / mask.length);
        const qs: Question[] = [{ kind: 'evidence', fact }, { kind: 'mismatch', fact }];
        for (const m of await explainMaps(engine, ctx.pm, input.data, qs, LAYERS, { estimate: { mode: 'exact' } })) {
          const e = energyInMask(m.up.data, mask);
          put(`${m.question.kind} ${m.layer}`, Number.isNaN(e) ? 0 : e, aucJudd(m.up.data, mask));
        }
      }
    }
    const areaFraction = mean(area);
    const lines = [`mask area fraction ${areaFraction.toFixed(3)} (n=${area.length})`];
    for (const [key, s] of scores) {
      const energy = mean(s.energy), auc = mean(s.auc);
      lines.push(`${key}: energy in mask ${energy.toFixed(3)}, AUC-Judd ${auc.toFixed(3)}`);
      assert.ok(energy > 1.5 * areaFraction, `${key}: energy in mask ${energy} ≤ 1.5 × area fraction ${areaFraction}`);
      assert.ok(auc > 0.5, `${key}: AUC-Judd ${auc} at or below chance`);
    }
    if (process.env.FACTFOIL_VERBOSE) console.log(lines.join('\n'));
  });
});
