/** factfoil.* settings: defaults for bad values, the default model per folder, where saves go, which estimate runs. */
import { strict as assert } from 'node:assert';
import { DEFAULT_SETTINGS, defaultModelFor, estimatePlan, resolveSettings, saveFolderFor } from '../../extension/settings';

describe('extension settings', () => {
  it('falls back to the defaults for missing, mistyped or out-of-range values', () => {
    assert.deepEqual(resolveSettings(() => undefined), DEFAULT_SETTINGS);
    const bad: Record<string, unknown> = { defaultMapKind: 'heatmap', colormap: 'jet', threads: -1, memoryBudgetMB: 1.5, probeSeeds: '8', saveLocation: 'cloud', saveFolder: '  ', defaultModels: ['x'], estimate: 'fast' };
    assert.deepEqual(resolveSettings((k) => bad[k]), DEFAULT_SETTINGS);
  });

  it('keeps valid values', () => {
    const good: Record<string, unknown> = { defaultMapKind: 'mismatch', colormap: 'inferno', threads: 4, memoryBudgetMB: 256, probeSeeds: 8, saveLocation: 'folder', saveFolder: 'maps', estimate: 'exact', defaultModels: { imgs: 'm.onnx', bad: 3 } };
    const s = resolveSettings((k) => good[k]);
    assert.deepEqual(s, { ...DEFAULT_SETTINGS, defaultMapKind: 'mismatch', colormap: 'inferno', threads: 4, memoryBudgetMB: 256, probeSeeds: 8, saveLocation: 'folder', saveFolder: 'maps', estimate: 'exact', defaultModels: { imgs: 'm.onnx' } });
  });

  it('reads the memory budget under its old id (memoryBudgetMiB) when only that one is set', () => {
    assert.equal(resolveSettings((k) => ({ memoryBudgetMiB: 300 } as Record<string, unknown>)[k]).memoryBudgetMB, 300);
    assert.equal(resolveSettings((k) => ({ memoryBudgetMiB: 300, memoryBudgetMB: 200 } as Record<string, unknown>)[k]).memoryBudgetMB, 200, 'the new id wins');
  });

  it('picks the default model of the deepest configured folder containing the image', () => {
    const s = { ...DEFAULT_SETTINGS, defaultModels: { data: 'models/a.onnx', 'data/hard': 'models/b.onnx', '/abs/elsewhere': '/abs/c.onnx' } };
    assert.equal(defaultModelFor('/ws/data/hard/x/1.png', s, '/ws'), '/ws/models/b.onnx');
    assert.equal(defaultModelFor('/ws/data/easy/1.png', s, '/ws'), '/ws/models/a.onnx');
    assert.equal(defaultModelFor('/ws/database/1.png', s, '/ws'), undefined, 'a folder is not a name prefix');
    assert.equal(defaultModelFor('/abs/elsewhere/1.png', s, undefined), '/abs/c.onnx');
    assert.equal(defaultModelFor('/ws/data/1.png', s, undefined), undefined, 'relative entries need a workspace folder');
  });

  it('saves beside the image by default, else into the save folder', () => {
    assert.equal(saveFolderFor('/ws/a/1.png', DEFAULT_SETTINGS, '/ws'), undefined);
    const f = { ...DEFAULT_SETTINGS, saveLocation: 'folder' as const };
    assert.equal(saveFolderFor('/ws/a/1.png', f, '/ws'), '/ws/factfoil-maps');
    assert.equal(saveFolderFor('/tmp/1.png', f, undefined), '/tmp/factfoil-maps');
    assert.equal(saveFolderFor('/ws/a/1.png', { ...f, saveFolder: '/out' }, '/ws'), '/out');
  });

  it('runs a probe first only for mismatch maps on auto', () => {
    assert.equal(estimatePlan('mismatch', 'auto', DEFAULT_SETTINGS), 'probe-then-exact');
    assert.equal(estimatePlan('mismatch', undefined, { ...DEFAULT_SETTINGS, estimate: 'probe' }), 'probe');
    assert.equal(estimatePlan('mismatch', 'exact', DEFAULT_SETTINGS), 'exact');
    assert.equal(estimatePlan('contrast', 'probe', DEFAULT_SETTINGS), 'exact');
  });
});
