/** Engine process messages: both ends refuse what they do not understand, naming the field. */
import { strict as assert } from 'node:assert';
import {
  ENGINE_PROTOCOL_VERSION, EngineMessageError, checkEngineResult, checkFromEngine, checkToEngine,
} from '../../../core/engine-process/protocol';
import { geometrySummary, panelSettingsOf, sidecarWithSettings } from '../../../core/engine-process/service';
import { computeGeometry, inputToOriginal, PREPROCESS_PRESETS } from '../../../core/image/preprocess';

const v = ENGINE_PROTOCOL_VERSION;
const maps = { op: 'maps', viewId: 'v1-1', kind: 'contrast', variant: 'margin', fact: 1, foil: 2, layers: ['stage4'], estimate: 'exact', probeSeeds: 8, budgetMiB: 512 };

function rejects(f: () => unknown, pattern: RegExp): void {
  assert.throws(f, (e: unknown) => e instanceof EngineMessageError && pattern.test(e.message));
}

describe('engine process protocol', () => {
  it('accepts well-formed requests and cancels', () => {
    assert.deepEqual(checkToEngine({ v, type: 'request', id: 3, request: maps }), { v, type: 'request', id: 3, request: maps });
    assert.deepEqual(checkToEngine({ v, type: 'cancel', id: 3 }), { v, type: 'cancel', id: 3 });
    const save = { op: 'save', viewId: 'v', mapId: 'm', colormap: 'viridis', opacity: 0.6, range: { lo: 0, hi: 1 }, includeRaw: false, outDir: '/o' };
    assert.deepEqual(checkToEngine({ v, type: 'request', id: 4, request: save }).type, 'request');
  });

  it('refuses another protocol version with a message that says what to do', () => {
    rejects(() => checkToEngine({ v: 2, type: 'cancel', id: 1 }), /engine protocol 2, expected 1 .*reinstall/);
    rejects(() => checkFromEngine({ type: 'ready', pid: 1 }), /message\.v/);
  });

  it('refuses unknown operations, unknown fields and out-of-range values, naming the field', () => {
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { op: 'eval', code: '1' } }), /request\.op: expected one of/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...maps, extra: 1 } }), /request\.extra: unexpected field/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...maps, foil: undefined } }), /foil: a contrast map needs a foil/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...maps, layers: [] } }), /layers/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...maps, estimate: 'probe:8' } }), /estimate/);
    rejects(() => checkToEngine({ v, type: 'request', id: 0, request: maps }), /message\.id/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { op: 'save', viewId: 'v', mapId: 'm', colormap: 'viridis', opacity: 0.6, range: { lo: 2, hi: 1 }, includeRaw: false } }), /lo 2 > hi 1/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { op: 'updateSettings', viewId: 'v', settings: { preprocessing: { width: 4, height: 4, resize: 'crop', channels: 'RGB', layout: 'NCHW', scale: 1, mean: [0, 0, 0], std: [1, 0, 1] } } } }), /std\[1\]/);
  });

  it('checks trust requests: known checks and kinds only, a box or a mask but not both', () => {
    const t = { op: 'trust', viewId: 'v', layer: 'stage4', fact: 0, tests: ['truth'], box: { x: 0, y: 0, width: 5, height: 5 } };
    assert.deepEqual(checkToEngine({ v, type: 'request', id: 1, request: t }).type, 'request');
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...t, tests: ['vibes'] } }), /tests\[0\]/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...t, kinds: ['mismatch'] } }), /kinds\[0\]/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...t, maskFile: '/m.png' } }), /not both/);
    rejects(() => checkToEngine({ v, type: 'request', id: 1, request: { ...t, box: { x: 0, y: 0, width: 0, height: 5 } } }), /box\.width/);
    rejects(() => checkEngineResult('trust', { format: 'other', layer: 'l' }), /format/);
  });

  it('checks what the engine sends: envelopes, progress, and results per operation', () => {
    assert.deepEqual(checkFromEngine({ v, type: 'progress', id: 2, done: 3, total: 8 }), { v, type: 'progress', id: 2, done: 3, total: 8 });
    rejects(() => checkFromEngine({ v, type: 'progress', id: 2, done: 9, total: 8 }), /9 > total 8/);
    rejects(() => checkFromEngine({ v, type: 'shout', id: 2 }), /message\.type/);
    rejects(() => checkEngineResult('maps', { maps: [{ mapId: 'm', kind: 'contrast', layer: 'l', fact: 0, width: 2, height: 2, values: 'AAAA', rawWidth: 1, rawHeight: 1, raw: 'AAAAAA==', range: { lo: 0, hi: 1 } }] }), /values: base64 of 4 float32/);
    rejects(() => checkEngineResult('save', { files: [3] }), /files\[0\]/);
    const summary = {
      path: '/m.onnx', name: 'm.onnx', sha256: 'ab', input: { name: 'x', dims: [1, 3, 4, 4], declared: [1, 3, 4, 4] },
      scores: { tensor: 'y', source: 'output', numClasses: 2 }, classes: ['a', 'b'], gray: false, layers: [],
      settings: { preprocessing: { width: 4, height: 4, resize: 'stretch', channels: 'RGB', layout: 'NCHW', scale: 1, mean: [0, 0, 0], std: [1, 1, 1] } },
      origin: { preprocessing: 'guessed', labels: 'beside', labelsFrom: '/labels.txt' },
    };
    assert.deepEqual(checkEngineResult('openModel', summary), summary);
    rejects(() => checkEngineResult('openModel', { ...summary, origin: undefined }), /summary|origin/);
    rejects(() => checkEngineResult('openModel', { ...summary, origin: { preprocessing: 'assumed', labels: 'beside' } }), /origin\.preprocessing/);
    rejects(() => checkEngineResult('openModel', { ...summary, origin: { preprocessing: 'guessed', labels: 'nearby' } }), /origin\.labels/);
    rejects(() => checkEngineResult('openModel', { ...summary, origin: { preprocessing: 'guessed', labels: 'file', labelsFrom: '' } }), /origin\.labelsFrom/);
  });

  it('turns core geometry into the panel\'s image_px = offset + model_px · scale, for every resize mode', () => {
    // Checked against core's own inputToOriginal at two model pixels per mode.
    for (const mode of ['stretch', 'crop', 'letterbox'] as const) {
      const g = computeGeometry(300, 200, [112, 96], mode);
      const s = geometrySummary(g);
      for (const [x, y] of [[0, 0], [50.5, 77.25]]) {
        const [ox, oy] = inputToOriginal(g, x, y);
        assert.ok(Math.abs(s.offsetX + x * s.scaleX - ox) < 1e-9 && Math.abs(s.offsetY + y * s.scaleY - oy) < 1e-9, `${mode} at ${x},${y}`);
      }
    }
  });

  it('writes panel settings into a sidecar: relative labels, grayscale kept, other fields kept', () => {
    const spec = { size: [112, 96] as [number, number], resize: 'crop' as const, layout: 'NCHW' as const, ...PREPROCESS_PRESETS.standardized, mean: [...PREPROCESS_PRESETS.standardized.mean], std: [...PREPROCESS_PRESETS.standardized.std] };
    const ps = panelSettingsOf(spec, { format: 'factfoil-model/1', labels: 'labels.txt' });
    assert.deepEqual(ps.preprocessing, { width: 96, height: 112, resize: 'crop', channels: 'RGB', layout: 'NCHW', scale: 1 / 255, mean: [0.485, 0.456, 0.406], std: [0.229, 0.224, 0.225] });
    assert.equal(ps.labelsFile, 'labels.txt');
    const old = { format: 'factfoil-model/1' as const, labels: ['a', 'b'], preprocess: { preset: 'unit' as const, background: [0, 0, 0] as [number, number, number] } };
    const sc = sidecarWithSettings(old, { ...ps, labelsFile: '/m/sub/names.txt' }, '/m/model.onnx', false);
    assert.deepEqual(sc, { format: 'factfoil-model/1', labels: 'sub/names.txt', preprocess: { background: [0, 0, 0], size: [112, 96], resize: 'crop', layout: 'NCHW', scale: 1 / 255, channels: 'RGB', mean: [0.485, 0.456, 0.406], std: [0.229, 0.224, 0.225] } });
    assert.equal(sidecarWithSettings(old, { preprocessing: ps.preprocessing, labelsFile: '/elsewhere/l.txt' }, '/m/model.onnx', false).labels, '/elsewhere/l.txt');
    assert.deepEqual(sidecarWithSettings(old, { preprocessing: ps.preprocessing }, '/m/model.onnx', false).labels, ['a', 'b'], 'inline labels kept');
    const gray = sidecarWithSettings(undefined, { preprocessing: { ...ps.preprocessing, mean: [0.5, 0.5, 0.5], std: [0.2, 0.2, 0.2] } }, '/m/model.onnx', true);
    assert.deepEqual([gray.preprocess!.channels, gray.preprocess!.mean, gray.preprocess!.std], ['GRAY', [0.5], [0.2]]);
  });
});
