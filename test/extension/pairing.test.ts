/** Which model goes with an image: the remembered pairing per folder and the quick pick order. */
import { strict as assert } from 'node:assert';
import { KeyValueStore, ModelPairings, orderModelCandidates } from '../../extension/pairing';

function memory(): KeyValueStore & { data: Map<string, unknown> } {
  const data = new Map<string, unknown>();
  return { data, get: <T>(k: string) => data.get(k) as T | undefined, update: async (k, v) => { if (v === undefined) data.delete(k); else data.set(k, v); } };
}

describe('model pairing and pick order', () => {
  it('remembers the model per image folder, most recent use first', async () => {
    const store = memory();
    const p = new ModelPairings(store);
    assert.equal(p.modelFor('/ws/imgs/a.png'), undefined);
    await p.remember('/ws/imgs/a.png', '/ws/m1.onnx');
    await p.remember('/ws/other/b.png', '/ws/m2.onnx');
    assert.equal(p.modelFor('/ws/imgs/zzz.jpg'), '/ws/m1.onnx', 'any image of the folder');
    assert.equal(p.modelFor('/ws/imgs/sub/a.png'), undefined, 'not a sub-folder');
    assert.deepEqual(p.recent(), ['/ws/m2.onnx', '/ws/m1.onnx']);
    await p.remember('/ws/imgs/a.png', '/ws/m2.onnx');
    assert.equal(p.modelFor('/ws/imgs/a.png'), '/ws/m2.onnx');
    assert.deepEqual(p.recent(), ['/ws/m2.onnx', '/ws/m1.onnx'], 'no duplicates');
    // A new ModelPairings over the same store (a new window session) still knows.
    assert.equal(new ModelPairings(store).modelFor('/ws/other/b.png'), '/ws/m2.onnx');
    await p.forgetAll();
    assert.equal(p.modelFor('/ws/imgs/a.png'), undefined);
  });

  it('forgets a model that failed to load: not paired with that folder, not recent', async () => {
    const p = new ModelPairings(memory());
    await p.remember('/ws/imgs/a.png', '/ws/good.onnx');
    await p.remember('/ws/other/b.png', '/ws/bad.onnx');
    await p.forget('/ws/imgs/a.png', '/ws/bad.onnx');
    assert.equal(p.modelFor('/ws/imgs/a.png'), '/ws/good.onnx', "another folder's pairing stays");
    await p.forget('/ws/other/b.png', '/ws/bad.onnx');
    assert.equal(p.modelFor('/ws/other/b.png'), undefined);
    assert.deepEqual(p.recent(), ['/ws/good.onnx']);
    const items = orderModelCandidates([{ path: '/ws/bad.onnx', mtimeMs: 2 }, { path: '/ws/good.onnx', mtimeMs: 1 }], { paired: p.modelFor('/ws/other/b.png'), recent: p.recent(), now: 3 });
    assert.equal(items[0].path, '/ws/good.onnx', 'the failed model is not offered first');
    assert.doesNotMatch(items[1].detail, /used/);
  });

  it('ignores junk in the store', () => {
    const store = memory();
    store.data.set('factfoil.pairings', ['not', 'a', 'map']);
    store.data.set('factfoil.recentModels', [1, '/ws/a.onnx', null]);
    const p = new ModelPairings(store);
    assert.equal(p.modelFor('/x/y.png'), undefined);
    assert.deepEqual(p.recent(), ['/ws/a.onnx']);
  });

  it('orders the quick pick: paired model, then by last use, then newest file first', () => {
    const now = Date.parse('2026-12-02T06:00:00Z');
    const c = [
      { path: '/ws/models/old.onnx', mtimeMs: now - 10 * 86400_000 },
      { path: '/ws/models/new.onnx', mtimeMs: now - 60_000 },
      { path: '/ws/b/used.onnx', mtimeMs: now - 20 * 86400_000 },
      { path: '/ws/paired.onnx', mtimeMs: now - 30 * 86400_000 },
      { path: '/ws/models/new.onnx', mtimeMs: now - 60_000 },
    ];
    const items = orderModelCandidates(c, { paired: '/ws/paired.onnx', recent: ['/ws/b/used.onnx', '/ws/paired.onnx'], root: '/ws', now });
    assert.deepEqual(items.map((i) => i.path), ['/ws/paired.onnx', '/ws/b/used.onnx', '/ws/models/new.onnx', '/ws/models/old.onnx']);
    assert.deepEqual(items.map((i) => i.description), ['', 'b', 'models', 'models']);
    assert.match(items[0].detail, /^used last for this folder · modified 30 days ago$/);
    assert.match(items[1].detail, /^used recently/);
    assert.equal(items[2].detail, 'modified just now');
    assert.equal(items[3].label, 'old.onnx');
  });
});
