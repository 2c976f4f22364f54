/**
 * The real engine process (dist/engine-process.js, forked the way the extension forks it) on the
 * parts demo model: open → maps → save → cancel within a sweep → crash and restart.
 * The maps it sends are compared with the same maps computed in this process by core, so the
 * IPC path is checked against the in-process engine (the maps themselves are checked against
 * their formulas in test/core/methods).
 */
import { strict as assert } from 'node:assert';
import { execFileSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { EngineClient, EngineRequestError, EngineExit } from '../../../extension/engine-client';
import { Engine } from '../../../core/engine/engine';
import { openModel } from '../../../core/workflow/open-model';
import { imageInput } from '../../../core/workflow/model-input';
import { explainMaps } from '../../../core/methods/maps';
import { FIXTURES, relL2 } from '../../helpers';
import { checkToWebview } from '../../../webview/protocol';

const ROOT = path.resolve(__dirname, '..', '..', '..');
const SCRIPT = path.join(ROOT, 'dist', 'engine-process.js');
const MODEL = path.join(FIXTURES, 'parts', 'parts-sorter.onnx');

function f32(b64: string): Float32Array {
  const b = Buffer.from(b64, 'base64');
  return new Float32Array(b.buffer, b.byteOffset, b.byteLength / 4);
}

describe('engine process (forked, demo model)', function () {
  this.timeout(120_000);
  let client: EngineClient;
  const logs: string[] = [];
  const exits: EngineExit[] = [];
  let dir: string;
  let image: string;

  before(() => {
    if (!existsSync(SCRIPT)) execFileSync(process.execPath, [path.join(ROOT, 'scripts', 'build.mjs')], { cwd: ROOT });
    // A copy of a demo image in a folder named like its class, so saving never touches the fixtures.
    dir = mkdtempSync(path.join(tmpdir(), 'ff-proc-'));
    const classDir = path.join(dir, 'washer');
    execFileSync('mkdir', ['-p', classDir]);
    image = path.join(classDir, 'washer-0001.png');
    copyFileSync(path.join(FIXTURES, 'parts', 'demo', 'washer', 'washer-0001.png'), image);
    const sink = (s: string) => logs.push(s);
    client = new EngineClient({ script: SCRIPT, log: { info: sink, warn: sink, error: sink }, env: { FACTFOIL_ENGINE_TEST_HOOKS: '1' }, onExit: (e) => exits.push(e) });
  });
  after(async () => {
    await client?.dispose();
    rmSync(dir, { recursive: true, force: true });
  });

  it('opens the model: inputs, scores, classes, stages and explainable layers', async () => {
    const s = await client.request({ op: 'openModel', model: MODEL }).result;
    assert.deepEqual(s.input.dims, [1, 3, 112, 112]);
    assert.equal(s.scores.numClasses, 8);
    assert.deepEqual(s.classes, readFileSync(path.join(FIXTURES, 'parts', 'labels.txt'), 'utf8').trim().split('\n'));
    assert.deepEqual(s.layers.filter((l) => l.stage).map((l) => l.id), ['stage1', 'stage2', 'stage3', 'stage4']);
    assert.ok(s.layers.every((l) => l.explainable));
    assert.equal(s.settings.preprocessing.width, 112);
    assert.deepEqual(s.origin, { preprocessing: 'sidecar', labels: 'sidecar', labelsFrom: path.join(FIXTURES, 'parts', 'labels.txt') });
  });

  it('says when preprocessing is guessed and where labels came from: beside the model, or generated', async () => {
    // The 1000-class fixture has labels.txt beside it and no settings file.
    const catalog = await client.request({ op: 'openModel', model: path.join(FIXTURES, 'catalog', 'catalog-sorter.onnx') }).result;
    assert.deepEqual(catalog.origin, { preprocessing: 'guessed', labels: 'beside', labelsFrom: path.join(FIXTURES, 'catalog', 'labels.txt') });
    assert.equal(catalog.classes.length, 1000);
    // The demo model alone in a folder: nothing to read labels from.
    const alone = mkdtempSync(path.join(tmpdir(), 'ff-alone-'));
    try {
      copyFileSync(MODEL, path.join(alone, 'bare.onnx'));
      const bare = await client.request({ op: 'openModel', model: path.join(alone, 'bare.onnx') }).result;
      assert.deepEqual(bare.origin, { preprocessing: 'guessed', labels: 'generated' });
      assert.equal(bare.classes[7], 'class 7');
    } finally { rmSync(alone, { recursive: true, force: true }); }
  });

  it('starts as the engine only: the CLI entry does not run inside its bundle', () => {
    // A CLI bundled into the engine once parsed the engine's own arguments and logged
    // "unknown command '--threads=0'" at every start.
    const text = logs.join('\n');
    assert.ok(/engine process \d+ ready/.test(text), text);
    assert.ok(!/unknown command|usage:/.test(text), text);
  });

  it('answers a contrast request with the same maps the in-process engine computes', async () => {
    const view = await client.request({ op: 'openView', model: MODEL, image }).result;
    assert.equal(view.summary.classes[view.expected!], 'washer', 'expected label from the folder name');
    assert.deepEqual([view.image.width, view.image.height], [112, 112]);
    const top = view.prediction[0].index;
    const foil = view.prediction[1].index;
    const layers = ['stage3', 'stage4'];
    const res = await client.request({ op: 'maps', viewId: view.viewId, kind: 'contrast', variant: 'margin', fact: top, foil, layers, estimate: 'exact', probeSeeds: 4, budgetMiB: 256 }).result;
    assert.equal(res.maps.length, 2);
    const checked = checkToWebview({ type: 'mapsResult', id: 1, maps: res.maps, final: true });
    assert.ok(checked.ok, `the panel accepts the engine's maps as they are (${checked.ok ? '' : checked.reason})`);
    // The same question computed here, with core directly.
    const engine = new Engine();
    try {
      const ctx = await openModel(engine, MODEL);
      const input = await imageInput(ctx, image);
      const ref = await explainMaps(engine, ctx.pm, input.data, [{ kind: 'contrast', fact: top, foil, contrast: 'margin' }], layers);
      for (const m of res.maps) {
        const r = ref.find((x) => x.layer === m.layer)!;
        assert.deepEqual([m.rawWidth, m.rawHeight], [r.raw.width, r.raw.height]);
        // Not bit for bit: onnxruntime's multi-threaded reductions may sum in another order under load.
        assert.ok(relL2(f32(m.raw), r.raw.data) < 1e-5, `raw map at ${m.layer} matches the in-process one`);
        assert.ok(relL2(f32(m.values), r.up.data) < 1e-5, `upsampled map at ${m.layer} matches the in-process one`);
      }
    } finally {
      await engine.dispose();
    }
    // Save beside the image: PNG + record, never overwriting.
    const req = { op: 'save' as const, viewId: view.viewId, mapId: res.maps[1].mapId, colormap: 'inferno' as const, opacity: 0.5, range: res.maps[1].range, includeRaw: true };
    const a = await client.request(req).result;
    const b = await client.request(req).result;
    assert.equal(a.files.length, 3);
    assert.ok(a.files.every((f) => path.dirname(f) === path.dirname(image)));
    assert.notDeepEqual(a.files, b.files, 'a second save gets new names');
    assert.match(path.basename(b.files[0]), /-2\.png$/);
    const record = JSON.parse(readFileSync(a.files[1], 'utf8'));
    assert.equal(record.format, 'factfoil-record/1');
    assert.equal(record.normalization.colormap, 'inferno');
    assert.equal(record.map.layer.id, 'stage4');
    assert.equal(record.model.path, MODEL);
    assert.equal(record.foil.index, foil);
    assert.equal(readdirSync(path.dirname(image)).length, 7);
  });

  it('sends a probe estimate first, then the exact mismatch sweep, with progress', async () => {
    const view = await client.request({ op: 'openView', model: MODEL, image }).result;
    const partials: { estimate?: { mode: string; k?: number } }[][] = [];
    const progress: [number, number][] = [];
    const res = await client.request({ op: 'maps', viewId: view.viewId, kind: 'mismatch', fact: 0, layers: ['stage4'], estimate: 'probe-then-exact', probeSeeds: 4, budgetMiB: 16 }, {
      onPartial: (r) => partials.push(r.maps),
      onProgress: (d, t) => progress.push([d, t]),
    }).result;
    assert.equal(partials.length, 1);
    assert.deepEqual(partials[0][0].estimate, { mode: 'probe', k: 4 });
    assert.deepEqual(res.maps[0].estimate, { mode: 'exact' });
    // The exact sweep needs at most one seed per class (fewer when the head's rank is lower).
    const [done, total] = progress[progress.length - 1];
    assert.ok(done === total && total >= 1 && total <= 8, `last progress ${done}/${total}`);
  });

  it('stops an exact sweep on cancel, between chunks, and keeps serving', async () => {
    const view = await client.request({ op: 'openView', model: MODEL, image }).result;
    // Every layer under a budget just above the smallest batch (3 seeds of about 9 MB here): the
    // sweep takes several native runs of tens of ms each (measured), so a cancel sent on the
    // first progress arrives before the last.
    const all = view.summary.layers.map((l) => l.id);
    let pendingId = 0;
    const seen: [number, number][] = [];
    const p = client.request({ op: 'maps', viewId: view.viewId, kind: 'mismatch', fact: 0, layers: all, estimate: 'exact', probeSeeds: 4, budgetMiB: 28 }, {
      onProgress: (d, t) => { seen.push([d, t]); if (seen.length === 1) client.cancel(pendingId); },
    });
    pendingId = p.id;
    await assert.rejects(p.result, (e: unknown) => e instanceof EngineRequestError && e.kind === 'cancelled');
    const [done, total] = seen[seen.length - 1];
    assert.ok(done < total, `stopped before the end of the sweep (progress ${seen.map((x) => x.join('/')).join(', ')})`);
    const again = await client.request({ op: 'predict', viewId: view.viewId }).result;
    assert.equal(again.prediction.length, 8);
  });

  it('reports a user error with its hint, not a crash', async () => {
    const view = await client.request({ op: 'openView', model: MODEL, image }).result;
    await assert.rejects(client.request({ op: 'maps', viewId: view.viewId, kind: 'evidence', fact: 0, layers: ['no-such-layer'], estimate: 'exact', probeSeeds: 4, budgetMiB: 64 }).result,
      (e: unknown) => e instanceof EngineRequestError && e.kind === 'user' && /no-such-layer/.test(e.message) && !!e.hint);
    await assert.rejects(client.request({ op: 'openModel', model: path.join(dir, 'missing.onnx') }).result,
      (e: unknown) => e instanceof EngineRequestError && e.kind === 'user' && /cannot read model/.test(e.message));
  });

  it('runs trust checks in the engine: truth against the demo mask, robustness, with progress; cancel stops a sanity check', async () => {
    const view = await client.request({ op: 'openView', model: MODEL, image }).result;
    const mask = path.join(FIXTURES, 'parts', 'demo-masks', 'washer', 'washer-0001.png');
    const progress: number[] = [];
    const report = await client.request({ op: 'trust', viewId: view.viewId, layer: 'stage4', fact: view.prediction[0].index, tests: ['truth', 'robustness'], kinds: ['evidence'], maskFile: mask }, {
      onProgress: (d) => progress.push(d),
    }).result;
    assert.equal(report.format, 'factfoil-trust/1');
    assert.equal(report.layer, 'stage4');
    assert.ok(report.truth && report.robustness, 'both checks reported');
    assert.ok(progress.length >= 2);
    const checked = checkToWebview({ type: 'trustResult', id: 1, report });
    assert.ok(checked.ok, `the panel accepts the engine's report as it is (${checked.ok ? '' : checked.reason})`);
    let id = 0;
    const p = client.request({ op: 'trust', viewId: view.viewId, layer: 'stage4', fact: 0, tests: ['sanity'], kinds: ['evidence', 'detail'] }, {
      onProgress: () => client.cancel(id),
    });
    id = p.id;
    await assert.rejects(p.result, (e: unknown) => e instanceof EngineRequestError && e.kind === 'cancelled');
  });

  it('without a box, the truth check finds the image\'s own mask by convention, or says how to give one', async () => {
    const eval_ = path.join(dir, 'eval', 'washer'), masks = path.join(dir, 'eval-masks', 'washer');
    execFileSync('mkdir', ['-p', eval_, masks]);
    copyFileSync(path.join(FIXTURES, 'parts', 'eval', 'washer', 'washer-0001.png'), path.join(eval_, 'washer-0001.png'));
    copyFileSync(path.join(FIXTURES, 'parts', 'eval-masks', 'washer', 'washer-0001.png'), path.join(masks, 'washer-0001.png'));
    const view = await client.request({ op: 'openView', model: MODEL, image: path.join(eval_, 'washer-0001.png') }).result;
    const ask = { op: 'trust' as const, viewId: view.viewId, layer: 'stage4', fact: view.prediction[0].index, tests: ['truth' as const], kinds: ['evidence' as const] };
    const report = await client.request(ask).result;
    assert.equal(report.truth?.source, 'mask');
    rmSync(masks, { recursive: true });
    await assert.rejects(client.request(ask).result,
      (e: unknown) => e instanceof EngineRequestError && e.kind === 'user' && /no object mask found for washer-0001\.png/.test(e.message));
  });

  it('writes panel settings to the sidecar atomically and reopens the view; a malformed sidecar is reported, not replaced', async () => {
    // A private copy of the model and its settings, so the fixture's sidecar is never touched.
    const mdir = path.join(dir, 'model');
    execFileSync('mkdir', ['-p', mdir]);
    for (const f of ['parts-sorter.onnx', 'parts-sorter.factfoil.json', 'labels.txt']) copyFileSync(path.join(FIXTURES, 'parts', f), path.join(mdir, f));
    const model = path.join(mdir, 'parts-sorter.onnx');
    const sidecar = path.join(mdir, 'parts-sorter.factfoil.json');
    const fixtureSidecar = readFileSync(path.join(FIXTURES, 'parts', 'parts-sorter.factfoil.json'), 'utf8');
    // Same bytes as the fixture model opened above: the engine must still treat it as its own file.
    const view = await client.request({ op: 'openView', model, image }).result;
    assert.equal(view.summary.path, model);
    const settings = { ...view.summary.settings, preprocessing: { ...view.summary.settings.preprocessing, resize: 'letterbox' as const } };
    const after = await client.request({ op: 'updateSettings', viewId: view.viewId, settings }).result;
    assert.equal(after.viewId, view.viewId);
    assert.equal(after.image.geometry.kind, 'letterbox');
    const written = JSON.parse(readFileSync(sidecar, 'utf8'));
    assert.equal(written.preprocess.resize, 'letterbox');
    assert.equal(written.labels, 'labels.txt', 'the labels file stays relative to the model');
    assert.deepEqual(readdirSync(mdir).sort(), ['labels.txt', 'parts-sorter.factfoil.json', 'parts-sorter.onnx'], 'no temporary file left behind');
    // Settings the model cannot take are refused before the file is touched.
    const before = readFileSync(sidecar, 'utf8');
    await assert.rejects(client.request({ op: 'updateSettings', viewId: view.viewId, settings: { ...settings, preprocessing: { ...settings.preprocessing, width: 100 } } }).result,
      (e: unknown) => e instanceof EngineRequestError && e.kind === 'user' && /does not match the model input/.test(e.message));
    assert.equal(readFileSync(sidecar, 'utf8'), before);
    // A sidecar broken by hand is reported with its name and kept as it is.
    writeFileSync(sidecar, '{ "format": "factfoil-model/1", ');
    await assert.rejects(client.request({ op: 'updateSettings', viewId: view.viewId, settings }).result,
      (e: unknown) => e instanceof EngineRequestError && e.kind === 'user' && e.message.includes(sidecar) && /not valid JSON/.test(e.message));
    assert.equal(readFileSync(sidecar, 'utf8'), '{ "format": "factfoil-model/1", ');
    assert.equal(readFileSync(path.join(FIXTURES, 'parts', 'parts-sorter.factfoil.json'), 'utf8'), fixtureSidecar, "the other copy's settings are untouched");
  });

  it('after a crash fails pending requests with a clear message and restarts on the next request', async () => {
    const gen = client.generation;
    const pid = client.pid;
    await assert.rejects(client.request({ op: 'crash', how: 'exit' }).result,
      (e: unknown) => e instanceof EngineRequestError && e.kind === 'stopped' && /stopped unexpectedly \(exit code 70\)/.test(e.message));
    assert.equal(exits.length, 1);
    const s = await client.request({ op: 'openModel', model: MODEL }).result;
    assert.equal(s.scores.numClasses, 8);
    assert.equal(client.generation, gen + 1);
    assert.notEqual(client.pid, pid);
  });

  it('after the process is killed (as the system does when memory runs out) says so and restarts', async () => {
    const view = await client.request({ op: 'openView', model: MODEL, image }).result;
    let killed = false;
    const p = client.request({ op: 'maps', viewId: view.viewId, kind: 'mismatch', fact: 0, layers: view.summary.layers.map((l) => l.id), estimate: 'exact', probeSeeds: 4, budgetMiB: 28 }, {
      onProgress: () => { if (!killed) { killed = true; process.kill(client.pid!, 'SIGKILL'); } },
    });
    await assert.rejects(p.result, (e: unknown) => e instanceof EngineRequestError && e.kind === 'stopped' && /killed \(SIGKILL\)/.test(e.message) && /memory/.test(e.hint ?? ''));
    assert.equal(exits[exits.length - 1].outOfMemory, true);
    // The old view id is gone with the old process: a clear user error, then a fresh view works.
    await assert.rejects(client.request({ op: 'predict', viewId: view.viewId }).result, (e: unknown) => e instanceof EngineRequestError && e.kind === 'user');
    const fresh = await client.request({ op: 'openView', model: MODEL, image }).result;
    assert.equal(fresh.prediction.length, 8);
  });
});
