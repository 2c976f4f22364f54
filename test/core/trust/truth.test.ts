/** Truth scoring on worked examples: through the preprocessing geometry, with crops, masks read from PNG, boxes parsed. */
import { strict as assert } from 'node:assert';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import sharp from 'sharp';
import { computeGeometry } from '../../../core/image/preprocess';
import { boxRegion, parseBox, readMask, truthScores } from '../../../core/trust/truth';

describe('truth scores', () => {
  it('a map shaped like the mask scores far above chance, its inverse below (stretch geometry, 8×8 image, 4×4 input)', () => {
    const g = computeGeometry(8, 8, [4, 4], 'stretch');
    const region = boxRegion({ x: 0, y: 0, width: 4, height: 4 }, 8, 8); // the top-left quarter
    const onMask = Float32Array.from({ length: 16 }, (_, i) => (i % 4 < 2 && i < 8 ? 1 : 0));
    const r = truthScores(new Map([['evidence', onMask], ['detail', onMask.map((v) => 1 - v)]]), { width: 4, height: 4 }, region, g);
    assert.equal(r.mask_fraction, 0.25);
    const e = r.maps.evidence!;
    // Upsampled bilinearly (half-pixel), the 2×2 block of ones becomes a ramp: all mass still peaks on the quarter.
    assert.ok(e.auc_judd! > 0.95 && e.nss! > 1 && e.cc! > 0.7 && e.energy_in_mask! > 0.8, JSON.stringify(e));
    assert.equal(e.pointing_hit, true);
    const d = r.maps.detail!;
    assert.ok(d.auc_judd! < 0.1 && d.nss! < 0 && d.cc! < 0, JSON.stringify(d));
  });

  it('leaves out image pixels the model never saw (outside a centre crop)', () => {
    // 12×8 image, crop to the centred 8×8, input 4×4: columns 0–1 and 10–11 are never seen.
    const g = computeGeometry(12, 8, [4, 4], 'crop');
    const region = boxRegion({ x: 0, y: 0, width: 2, height: 8 }, 12, 8); // only unseen pixels
    const map = Float32Array.from({ length: 16 }, (_, i) => i);
    const r = truthScores(new Map([['evidence', map]]), { width: 4, height: 4 }, region, g);
    assert.deepEqual(r.maps.evidence, { nss: null, cc: null, auc_judd: null, sim: null, energy_in_mask: null, pointing_hit: false });
  });

  it('reads a mask PNG (bright = inside), refusing a wrong size or an empty mask', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-mask-'));
    const rgb = Buffer.alloc(6 * 4 * 3);
    for (const i of [0, 1, 7]) rgb.fill(200, 3 * i, 3 * i + 3);
    rgb[3 * 9 + 2] = 127; // a dim pixel stays outside
    const file = path.join(dir, 'm.png');
    await sharp(rgb, { raw: { width: 6, height: 4, channels: 3 } }).png().toFile(file);
    const m = await readMask(file, 6, 4);
    assert.deepEqual([...m.mask.keys()].filter((i) => m.mask[i]), [0, 1, 7]);
    await assert.rejects(readMask(file, 5, 4), /m\.png is 6×4 but the image is 5×4/);
    const empty = path.join(dir, 'e.png');
    await sharp(Buffer.alloc(6 * 4 * 3), { raw: { width: 6, height: 4, channels: 3 } }).png().toFile(empty);
    await assert.rejects(readMask(empty, 6, 4), /marks no pixel/);
  });

  it('parses x,y,w,h boxes and refuses anything else', () => {
    assert.deepEqual(parseBox('1, 2,30,40.5'), { x: 1, y: 2, width: 30, height: 40.5 });
    for (const bad of ['1,2,3', '1,2,0,4', 'a,b,c,d', '1,2,3,4,5']) assert.throws(() => parseBox(bad), /--box must be x,y,w,h/, bad);
  });
});
