import { strict as assert } from 'node:assert';
import sharp from 'sharp';
import type { DecodedImage } from '../../../core/image/decode';
import { colormapTable } from '../../../core/image/colormap';
import { computeGeometry } from '../../../core/image/preprocess';
import { renderMapPng, renderOverlayPng, renderOverlayRgb, upsampleMapToOriginal, type MapGrid } from '../../../core/image/overlay';

function flatImage(width: number, height: number, rgb: [number, number, number]): DecodedImage {
  const data = new Uint8Array(width * height * 3);
  for (let i = 0; i < data.length; i += 3) data.set(rgb, i);
  return { width, height, rgb: data, format: 'png', path: 'flat.png' };
}
const grid = (width: number, height: number, values: number[]): MapGrid => ({ width, height, data: Float32Array.from(values) });
const viridis = (i: number) => [...colormapTable('viridis').subarray(i * 3, i * 3 + 3)];

describe('core/image/overlay', () => {
  it('upsamples like ONNX Resize linear with half_pixel coordinates (hand-computed 2 → 4)', () => {
    // Reference: ONNX Resize, coordinate_transformation_mode half_pixel: x_in = (x_out + 0.5)/scale − 0.5
    // = −0.25, 0.25, 0.75, 1.25 for 2 → 4; clamped to the edge: v0, .75v0 + .25v1, .25v0 + .75v1, v1.
    const m = grid(2, 1, [0, 8]);
    const g = computeGeometry(4, 1, [1, 2], 'stretch');
    assert.deepEqual([...upsampleMapToOriginal(m, g)], [0, 2, 6, 8]);
    // 2-D: separable, the same weights per axis.
    const m2 = grid(2, 2, [0, 8, 16, 24]);
    const up = upsampleMapToOriginal(m2, computeGeometry(4, 4, [2, 2], 'stretch'));
    assert.deepEqual([...up.subarray(4, 8)], [4, 6, 10, 12]); // row y = 1: 0.75·row0 + 0.25·row1
  });

  it('handles a map coarser than the model input (a layer-resolution grid)', () => {
    // A 1×1 map covers the whole input: every original pixel gets its value.
    const g = computeGeometry(10, 6, [4, 4], 'stretch');
    assert.ok([...upsampleMapToOriginal(grid(1, 1, [3]), g)].every((v) => v === 3));
  });

  it('carries a crop back: only the cropped part gets the map, the rest is NaN', () => {
    // 12×4 original, centre crop 4×4 (columns 4..7) onto a 2×2 input; map [[1,1],[1,1]].
    const g = computeGeometry(12, 4, [2, 2], 'crop');
    assert.deepEqual(g.source, { x: 4, y: 0, width: 4, height: 4 });
    const up = upsampleMapToOriginal(grid(2, 2, [1, 1, 1, 1]), g);
    for (let x = 0; x < 12; x++) assert.equal(Number.isNaN(up[x]), x < 4 || x >= 8, `column ${x}`);
  });

  it('carries a letterbox back: the padding never reaches the original image', () => {
    // 8×4 original letterboxed into 4×4: content rows 1..2. A map that is 9 on the padding rows and
    // 1 on the content rows must give 1 everywhere on the original.
    const g = computeGeometry(8, 4, [4, 4], 'letterbox');
    const map = grid(4, 4, [9, 9, 9, 9, 1, 1, 1, 1, 1, 1, 1, 1, 9, 9, 9, 9]);
    const up = upsampleMapToOriginal(map, g);
    // Original row y centre (y + 0.5) → input row 1 + (y + 0.5)/2 → map coordinate − 0.5 = 0.75 + y/2.
    // y = 1 → 1.25 and y = 2 → 1.75 sit between content rows 1 and 2: exactly 1.
    for (let x = 0; x < 8; x++) assert.equal(up[8 + x], 1);
    for (let x = 0; x < 8; x++) assert.equal(up[16 + x], 1);
    // y = 0 → 0.75 would read padding row 0 as a neighbour; the clamp to content cell centres
    // (rows 1..2) keeps it at row 1: exactly 1, likewise y = 3.
    assert.ok(up.every((v) => v === 1), `padding leaked: ${[...up]}`);
    // A coarse 2×2 map of the letterboxed 4×4 input: each cell straddles content and padding,
    // so both are used: row 0 → input 1.25 → m = 0.125 → 5.25; row 3 → 2.75 → m = 0.875 → 6.75.
    const coarse = upsampleMapToOriginal(grid(2, 2, [5, 5, 7, 7]), g);
    assert.equal(coarse[0], 5.25);
    assert.equal(coarse[31], 6.75);
  });

  it('alpha-blends the colormap colour onto the image: out = (1 − α)·image + α·colour', () => {
    const img = flatImage(2, 1, [200, 100, 0]);
    const map = grid(2, 1, [0, 1]);
    const g = computeGeometry(2, 1, [1, 2], 'stretch');
    const range = { lo: 0, hi: 1 };
    const opaque = renderOverlayRgb(img, map, g, { colormap: 'viridis', opacity: 1, range });
    assert.deepEqual([...opaque], [...viridis(0), ...viridis(255)]);
    const clear = renderOverlayRgb(img, map, g, { colormap: 'viridis', opacity: 0, range });
    assert.deepEqual([...clear], [...img.rgb]);
    const half = renderOverlayRgb(img, map, g, { colormap: 'viridis', opacity: 0.5, range });
    const want = [...viridis(0), ...viridis(255)].map((c, i) => Math.round(0.5 * img.rgb[i] + 0.5 * c));
    assert.deepEqual([...half], want);
  });

  it('dims original pixels the model never saw (outside a crop) instead of colouring them', () => {
    const img = flatImage(6, 2, [100, 200, 50]);
    const g = computeGeometry(6, 2, [2, 2], 'crop'); // keeps columns 2..3
    const out = renderOverlayRgb(img, grid(1, 1, [1]), g, { colormap: 'viridis', opacity: 1, range: { lo: 0, hi: 1 } });
    assert.deepEqual([...out.subarray(0, 3)], [50, 100, 25]);
    assert.deepEqual([...out.subarray(2 * 3, 3 * 3)], viridis(255));
  });

  it('encodes the overlay as a PNG at the original size', async () => {
    const img = flatImage(37, 23, [10, 20, 30]);
    const g = computeGeometry(37, 23, [8, 8], 'letterbox');
    const map = grid(8, 8, Array.from({ length: 64 }, (_, i) => i / 63));
    const opts = { colormap: 'inferno' as const, opacity: 0.6, range: { lo: 0, hi: 1 } };
    const png = await renderOverlayPng(img, map, g, opts);
    const { data, info } = await sharp(png).raw().toBuffer({ resolveWithObject: true });
    assert.deepEqual([info.width, info.height, info.channels], [37, 23, 3]);
    assert.deepEqual([...data], [...renderOverlayRgb(img, map, g, opts)]);
  });

  it('renders a bare map at its own grid or a requested size', async () => {
    const map = grid(2, 1, [0, 1]);
    const png = await renderMapPng(map, { lo: 0, hi: 1 }, 'viridis');
    const own = await sharp(png).raw().toBuffer({ resolveWithObject: true });
    assert.deepEqual([own.info.width, own.info.height], [2, 1]);
    assert.deepEqual([...own.data], [...viridis(0), ...viridis(255)]);
    const big = await sharp(await renderMapPng(map, { lo: 0, hi: 1 }, 'viridis', { width: 4, height: 2 })).raw().toBuffer({ resolveWithObject: true });
    assert.deepEqual([big.info.width, big.info.height], [4, 2]);
    // Columns 0.., values 0, .25, .75, 1 → entries 0, 64, 192, 255.
    assert.deepEqual([...big.data.subarray(0, 12)], [...viridis(0), ...viridis(64), ...viridis(192), ...viridis(255)]);
  });
});
