/**
 * runTrustChecks end to end on the demo model: the report is the shape the panel protocol
 * accepts, progress climbs to its total, cancelling stops it, mistakes are named; and the
 * `gradient` kind matches central finite differences of the logit (a reference outside the engine).
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { openModel, ModelContext } from '../../../core/workflow/open-model';
import { imageInput } from '../../../core/workflow/model-input';
import { defaultTrustKinds, regionFor, runTrustChecks } from '../../../core/trust/run';
import type { PreparedModel } from '../../../core/plan/prepared';
import { gradientSaliency } from '../../../core/trust/subject';
import { checkToWebview } from '../../../webview/protocol';
import { isUserError } from '../../../core/errors';
import { FIXTURES } from '../../helpers';

const PARTS = path.join(FIXTURES, 'parts');
const IMAGE = path.join(PARTS, 'eval/bolt/bolt-0004.png');
const MASK = path.join(PARTS, 'eval-masks/bolt/bolt-0004.png');
const SMALL = { sanity: { depth: 1, independent: 1 }, faithfulness: { steps: 8, randomOrders: 1 }, robustness: { blurSigmas: [1], noiseSigmas: [0.1] } };

describe('runTrustChecks', () => {
  const engine = new Engine();
  let ctx: ModelContext;
  before(async () => { ctx = await openModel(engine, path.join(PARTS, 'parts-sorter.onnx')); });
  after(() => engine.dispose());

  it('returns a report the panel protocol accepts, with every check and kind, and progress up to its total', async () => {
    const input = await imageInput(ctx, IMAGE);
    const region = await regionFor({ maskFile: MASK }, { width: input.image!.width, height: input.image!.height });
    const seen: [number, number][] = [];
    const r = await runTrustChecks(engine, ctx.pm, { data: input.data, layout: 'NCHW', geometry: input.geometry }, { ...SMALL, region }, (d, t) => seen.push([d, t]));
    const checked = checkToWebview({ type: 'trustResult', id: 1, report: JSON.parse(JSON.stringify(r)) });
    assert.ok(checked.ok, !checked.ok ? checked.reason : '');
    assert.equal(r.layer, 'stage4');
    assert.equal(ctx.labels[r.fact], 'bolt');
    assert.deepEqual(r.kinds, ['evidence', 'contrast', 'detail', 'guided-evidence', 'gradient']);
    assert.deepEqual(r.sanity!.cascade.map((s) => s.randomized), [['logits']]);
    assert.deepEqual(r.robustness!.steps.map((s) => s.perturbation), ['blur', 'noise']);
    assert.equal(r.truth!.source, 'mask');
    for (const k of r.kinds) assert.ok(r.faithfulness!.maps[k] && r.truth!.maps[k], k);
    assert.ok(seen.length > 5);
    for (let i = 1; i < seen.length; i++) assert.ok(seen[i][0] >= seen[i - 1][0] - 1e-9, `progress went back at ${i}`);
    assert.deepEqual(seen.at(-1), [seen[0][1], seen[0][1]]);
  });

  it('stops with a cancelled UserError when the signal is aborted mid-run', async () => {
    const input = await imageInput(ctx, IMAGE);
    const abort = new AbortController();
    await assert.rejects(
      runTrustChecks(engine, ctx.pm, { data: input.data }, { ...SMALL, tests: ['sanity', 'faithfulness'] }, (d) => { if (d >= 1) abort.abort(); }, abort.signal),
      (e: unknown) => isUserError(e) && /cancelled/.test((e as Error).message),
    );
  });

  it('names the mistake: truth without a region, an unknown kind, a wrong input size', async () => {
    const input = await imageInput(ctx, IMAGE);
    await assert.rejects(runTrustChecks(engine, ctx.pm, { data: input.data }, { tests: ['truth'] }), /truth check needs the object region/);
    await assert.rejects(runTrustChecks(engine, ctx.pm, { data: input.data }, { kinds: ['mismatch' as never] }), /map kind 'mismatch' is not checked/);
    await assert.rejects(runTrustChecks(engine, ctx.pm, { data: new Float32Array(10) }), /the input has 10 values but .* takes \[1,3,112,112\]/);
  });

  it('leaves out input-resolution kinds by default when an op without a gradient rule blocks the way to the input', () => {
    const pm = (blocked: boolean) => ({ layers: [{ id: 'a', blockedBy: blocked ? { opType: 'Einsum', node: 'n' } : undefined }, { id: 'b' }] }) as unknown as PreparedModel;
    assert.deepEqual(defaultTrustKinds(pm(false)), ['evidence', 'contrast', 'detail', 'guided-evidence', 'gradient']);
    assert.deepEqual(defaultTrustKinds(pm(true)), ['evidence', 'contrast']);
  });

  it('gradient saliency equals max over channels of |∂z/∂x| by central finite differences (float32 forward, h = 1e-2)', async () => {
    const input = (await imageInput(ctx, IMAGE)).data;
    const fact = 4;
    const map = await gradientSaliency(engine, ctx.pm, input, fact, 'NCHW');
    const P = 112 * 112;
    // The three most salient pixels: large gradients, so float32 differences resolve them.
    const top = [...map.keys()].sort((a, b) => map[b] - map[a]).slice(0, 3);
    for (const p of top) {
      let fd = 0;
      for (let c = 0; c < 3; c++) {
        const h = 1e-2;
        const plus = input.slice(); plus[c * P + p] += h;
        const minus = input.slice(); minus[c * P + p] -= h;
        const d = ((await engine.scores(ctx.pm, plus))[fact] - (await engine.scores(ctx.pm, minus))[fact]) / (2 * h);
        fd = Math.max(fd, Math.abs(d));
      }
      assert.ok(Math.abs(fd - map[p]) < 0.05 * map[p], `pixel ${p}: finite differences ${fd} vs map ${map[p]}`);
    }
  });
});
