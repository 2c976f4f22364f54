import { strict as assert } from 'node:assert';
import { colormapIndexer, colormapTable as coreTable } from '../../core/image/colormap';
import { colorIndexFor, colormapTable } from '../../webview/colormap';
import { COLORMAPS } from '../../webview/protocol';

// The panel must show the colours a saved PNG gets: core/image/colormap.ts is the reference.
describe('webview colormaps match core/image', () => {
  for (const name of COLORMAPS) {
    it(`${name}: all 768 bytes equal core/image's table`, () => {
      assert.deepEqual(Array.from(colormapTable(name)), Array.from(coreTable(name)));
    });
    it(`${name}: value → entry rule equals core/image's colormapIndexer`, () => {
      for (const [lo, hi] of [[0, 1], [-2, 3], [0.5, 0.5], [1e-6, 2e-6]]) {
        const a = colorIndexFor({ lo, hi }, name), b = colormapIndexer(lo, hi, name);
        for (const v of [lo - 1, lo, hi, hi + 1, NaN, (lo + hi) / 2, lo + (hi - lo) * 0.999, lo + (hi - lo) / 256]) assert.equal(a(v), b(v), `${name} [${lo},${hi}] v=${v}`);
      }
    });
  }
  it('viridis starts dark purple and ends yellow (published endpoints #440154 and #fde725, from memory)', () => {
    const t = colormapTable('viridis');
    assert.deepEqual(Array.from(t.subarray(0, 3)), [0x44, 0x01, 0x54]);
    assert.deepEqual(Array.from(t.subarray(765, 768)), [0xfd, 0xe7, 0x25]);
  });
});
