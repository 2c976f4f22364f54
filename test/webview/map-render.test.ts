import { strict as assert } from 'node:assert';
import { decodeFloat32Base64, encodeFloat32Base64 } from '../../webview/float32-base64';
import { colorizeOntoImage, displayRange, formatValue, imageToModel, rawValueAt, sampleBilinear, sharedRange } from '../../webview/map-render';
import type { ImageGeometry } from '../../webview/protocol';

describe('map rendering', () => {
  it('base64 float32 round-trips, little-endian (1.0f = 00 00 80 3f, IEEE 754)', () => {
    const v = new Float32Array([1, -2.5, 3.4028234663852886e38, 1e-45, 0]);
    assert.deepEqual(Array.from(decodeFloat32Base64(encodeFloat32Base64(v))), Array.from(v));
    assert.equal(Buffer.from(encodeFloat32Base64([1]), 'base64').toString('hex'), '0000803f');
  });

  it('bilinear sampling follows ONNX Resize half_pixel (x_orig = (x + 0.5)/scale − 0.5)', () => {
    // 2×1 grid [0, 10] upsampled ×4 to 8 pixels; by the ONNX formula output pixel i samples
    // x_orig = (i + 0.5)/4 − 0.5, clamped to [0, 1]: 0, 0, 1.25, 3.75, 6.25, 8.75, 10, 10.
    const g = { data: new Float32Array([0, 10]), width: 2, height: 1 };
    const out = Array.from({ length: 8 }, (_, i) => sampleBilinear(g, (i + 0.5) / 4, 0.5));
    assert.deepEqual(out.map((x) => Math.round(x * 100) / 100), [0, 0, 1.25, 3.75, 6.25, 8.75, 10, 10]);
  });

  it('letterbox covers the whole image; crop leaves pixels outside the crop transparent', () => {
    // Image 8×4 letterboxed into a 4×4 model input: 2 image px per model px, the image fills model
    // rows 1..2 (one padding row above and below) → image_y = −2 + 2·model_y.
    const geom: ImageGeometry = { kind: 'letterbox', scaleX: 2, scaleY: 2, offsetX: 0, offsetY: -2 };
    const map = { data: new Float32Array(16).fill(1), width: 4, height: 4 };
    const table = new Uint8Array(768).fill(200);
    const px = colorizeOntoImage(map, geom, 8, 4, () => 255, table);
    // every image pixel lies inside the model input rows 1..2 → all opaque
    for (let i = 0; i < 8 * 4; i++) assert.equal(px[i * 4 + 3], 255);
    // crop: image smaller than the model view's span → image pixels outside map to nothing
    const crop: ImageGeometry = { kind: 'crop', scaleX: 1, scaleY: 1, offsetX: 2, offsetY: 0 };
    const px2 = colorizeOntoImage(map, crop, 8, 4, () => 0, table);
    assert.equal(px2[3], 0, 'x=0 is left of the crop');
    assert.equal(px2[2 * 4 + 3], 255, 'x=2 is the first cropped-in column');
    assert.equal(px2[6 * 4 + 3], 0, 'x=6 is past the 4-pixel-wide crop');
  });

  it('raw read-out maps an image point to the layer cell that covers it', () => {
    const geom: ImageGeometry = { kind: 'stretch', scaleX: 2, scaleY: 2, offsetX: 0, offsetY: 0 };
    assert.deepEqual(imageToModel(geom, 10, 6), [5, 3]);
    const raw = { data: Float32Array.from({ length: 9 }, (_, i) => i), width: 3, height: 3 };
    // model 12×12, layer 3×3 → a cell is 4 model px; image (18, 2) → model (9, 1) → cell (2, 0)
    const r = rawValueAt(raw, 12, 12, geom, 18, 2);
    assert.deepEqual([r?.cellX, r?.cellY, r?.value], [2, 0, 2]);
    assert.equal(rawValueAt(raw, 12, 12, geom, 24, 2), undefined, 'outside the model input');
  });

  it('display range: suggested, map max, symmetric for diverging, and a shared union', () => {
    const v = new Float32Array([-1, 0.5, 4]);
    assert.deepEqual(displayRange({ lo: 0, hi: 2 }, v, 'suggested', false), { lo: 0, hi: 2 });
    assert.deepEqual(displayRange({ lo: 0, hi: 2 }, v, 'max', false), { lo: -1, hi: 4 });
    assert.deepEqual(displayRange({ lo: -1, hi: 2 }, v, 'suggested', true), { lo: -2, hi: 2 });
    assert.deepEqual(sharedRange([{ lo: 0, hi: 1 }, { lo: -0.5, hi: 0.2 }]), { lo: -0.5, hi: 1 });
    assert.equal(formatValue(0.000123), '1.23e-4');
    assert.equal(formatValue(0.5884), '0.588');
  });
});
