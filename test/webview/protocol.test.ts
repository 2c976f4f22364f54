import { strict as assert } from 'node:assert';
import { encodeFloat32Base64 } from '../../webview/float32-base64';
import { PROTOCOL_VERSION, checkFromWebview, checkToWebview, validateFromWebview, validateToWebview } from '../../webview/protocol';
import { initMessage, synthMap, STAGES } from './harness/synthetic-scene';

const good = {
  requestMaps: { type: 'requestMaps', id: 3, kind: 'contrast', variant: 'margin', fact: 1, foil: 2, layers: ['a'] },
  save: { type: 'save', id: 4, mapId: 'm1', colormap: 'viridis', opacity: 0.6, range: { lo: 0, hi: 1 }, includeRaw: false },
};

describe('webview protocol validators', () => {
  it('accepts every well-formed message from the webview', () => {
    const msgs = [
      { type: 'ready', version: PROTOCOL_VERSION }, good.requestMaps, good.save,
      { type: 'updateSettings', id: 5, settings: { preprocessing: { width: 224, height: 224, resize: 'crop', channels: 'BGR', layout: 'NHWC', scale: 1, mean: [0, 0, 0], std: [1, 1, 1] } } },
      { type: 'pickLabelsFile', id: 6 }, { type: 'cancel', id: 3 }, { type: 'reveal', path: '/a/b.png' }, { type: 'log', level: 'error', message: 'x' },
      { type: 'requestMaps', id: 7, kind: 'mismatch', variant: 'gradient', fact: 0, layers: ['a', 'b'], estimate: 'probe' },
    ];
    for (const m of msgs) assert.deepEqual(validateFromWebview(m), m, JSON.stringify(m));
  });

  it('rejects malformed messages from the webview, naming the field', () => {
    const bad: [unknown, RegExp][] = [
      [null, /message object/],
      ['ready', /message object/],
      [{ type: 'launchMissiles' }, /unknown message type/],
      [{ ...good.requestMaps, id: 0 }, /message\.id: 0 outside/],
      [{ ...good.requestMaps, id: 1.5 }, /integer/],
      [{ ...good.requestMaps, kind: 'heat' }, /message\.kind/],
      [{ ...good.requestMaps, variant: 'weighted' }, /does not belong to kind contrast/],
      [{ ...good.requestMaps, foil: undefined }, /needs a foil/],
      [{ ...good.requestMaps, fact: -1 }, /message\.fact/],
      [{ ...good.requestMaps, layers: [] }, /array length 0/],
      [{ ...good.requestMaps, layers: ['x'.repeat(1025)] }, /string length 1025/],
      [{ ...good.requestMaps, extra: 1 }, /message\.extra: unexpected field/],
      [{ ...good.save, opacity: 1.5 }, /message\.opacity/],
      [{ ...good.save, range: { lo: 2, hi: 1 } }, /lo 2 > hi 1/],
      [{ ...good.save, range: { lo: 0, hi: Infinity } }, /finite/],
      [{ ...good.save, colormap: 'rainbow' }, /colormap/],
      [{ type: 'reveal', path: '' }, /string length 0/],
    ];
    for (const [m, why] of bad) {
      assert.equal(validateFromWebview(m), undefined, JSON.stringify(m));
      const r = checkFromWebview(m);
      assert.ok(!r.ok && why.test(r.reason), `${JSON.stringify(m)?.slice(0, 80)} → ${!r.ok ? r.reason : 'accepted'}`);
    }
  });

  it('accepts the synthetic init and map answers, and checks base64 length against the declared size', async () => {
    const init = await initMessage();
    assert.ok(validateToWebview(init));
    const map = synthMap({ kind: 'contrast', variant: 'margin', fact: 1, foil: 2 }, STAGES[0]);
    assert.ok(validateToWebview({ type: 'mapsResult', id: 1, maps: [map], final: true }));
    // 24×24 raw values need 4·ceil(24·24·4/3) base64 characters; one value short must fail.
    const short = { ...map, raw: encodeFloat32Base64(new Float32Array(24 * 24 - 1)) };
    const r = checkToWebview({ type: 'mapsResult', id: 1, maps: [short], final: true });
    assert.ok(!r.ok && /maps\[0\]\.raw: base64 length/.test(r.reason), !r.ok ? r.reason : 'accepted');
    const notB64 = { ...map, values: '!'.repeat(map.values.length) };
    assert.equal(validateToWebview({ type: 'mapsResult', id: 1, maps: [notB64], final: true }), undefined);
  });

  it('rejects malformed host messages', async () => {
    const init = await initMessage();
    const map = synthMap({ kind: 'evidence', fact: 1 }, STAGES[1]);
    const bad: unknown[] = [
      { ...init, prediction: [{ index: 99, label: 'x', p: 0.5 }] }, // index outside the labels
      { ...init, expected: 8 },
      { ...init, labels: [] },
      { ...init, image: { ...init.image, uri: 'javascript:alert(1)' } },
      { ...init, image: { ...init.image, geometry: { ...init.image.geometry, scaleX: 0 } } },
      { type: 'mapsResult', id: 1, maps: [{ ...map, width: 0 }], final: true },
      { type: 'mapsResult', id: 1, maps: [{ ...map, estimate: { mode: 'probe' } }], final: false }, // probe needs K
      { type: 'mapsResult', id: 1, maps: [{ ...map, kind: 'evidence', variant: 'loss' }], final: true },
      { type: 'progress', id: 1, done: 5, total: 4 },
      { type: 'failed', id: 1 },
      { type: 'notice', level: 'fatal', message: 'x' },
      { type: 'saveResult', id: 1, files: 'a.png', message: 'x' },
    ];
    for (const m of bad) assert.equal(validateToWebview(m), undefined, JSON.stringify(m).slice(0, 160));
  });
});
