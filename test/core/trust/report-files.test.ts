/**
 * Trust reports written beside the image: the JSON and its chart PNGs under one stem, names
 * sanitized, an existing file never overwritten (DESIGN §6: append -2, -3, …). The PNG signature
 * is the PNG specification's (section 5.2).
 */
import { strict as assert } from 'node:assert';
import { mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { isPng, trustReportStem, writeTrustReport } from '../../../core/trust/report-files';
import { SAMPLE_REPORT } from '../../webview/trust-protocol.test';

describe('trust report files', () => {
  let dir: string;
  beforeEach(() => { dir = mkdtempSync(join(tmpdir(), 'factfoil-trust-files-')); });
  afterEach(() => rmSync(dir, { recursive: true, force: true }));

  it('recognises PNG bytes by their 8-byte signature only', async () => {
    const png = await sharp({ create: { width: 2, height: 2, channels: 3, background: '#fff' } }).png().toBuffer();
    assert.equal(isPng(png), true);
    assert.equal(isPng(Buffer.from('GIF89a\0\0\0')), false);
    assert.equal(isPng(png.subarray(0, 8)), false, 'a bare signature is not an image');
  });

  it('writes the JSON and charts under one stem beside the image, and never overwrites', async () => {
    const image = join(dir, 'belt 0417.png');
    writeFileSync(image, 'not read');
    const png = await sharp({ create: { width: 4, height: 3, channels: 3, background: '#fff' } }).png().toBuffer();
    const t = { imagePath: image, model: { path: join(dir, 'm.onnx'), sha256: 'ab'.repeat(32) }, labels: ['hex/nut', 'washer'] };
    const report = { ...SAMPLE_REPORT, fact: 0 };
    assert.equal(trustReportStem(t, report), 'belt_0417.trust.stage4.hex_nut');
    // Someone's own file under the first stem is kept: the whole set moves to -2.
    writeFileSync(join(dir, 'belt_0417.trust.stage4.hex_nut.faithfulness.png'), 'mine');
    const first = await writeTrustReport(t, report, [{ ext: '.faithfulness.png', png }, { ext: '.sanity.png', png }]);
    assert.deepEqual(first.map((p) => p.slice(dir.length + 1)), [
      'belt_0417.trust.stage4.hex_nut-2.json', 'belt_0417.trust.stage4.hex_nut-2.faithfulness.png', 'belt_0417.trust.stage4.hex_nut-2.sanity.png',
    ]);
    assert.equal(readFileSync(join(dir, 'belt_0417.trust.stage4.hex_nut.faithfulness.png'), 'utf8'), 'mine');
    const json = JSON.parse(readFileSync(first[0], 'utf8'));
    assert.equal(json.format, 'factfoil-trust/1');
    assert.deepEqual(json.labels, { fact: 'hex/nut' });
    assert.deepEqual(json.charts, ['belt_0417.trust.stage4.hex_nut-2.faithfulness.png', 'belt_0417.trust.stage4.hex_nut-2.sanity.png']);
    assert.deepEqual(readFileSync(first[1]), png);
    // Saving the same report again takes the next free stem.
    const second = await writeTrustReport(t, report, [{ ext: '.faithfulness.png', png }]);
    assert.equal(second[0].slice(dir.length + 1), 'belt_0417.trust.stage4.hex_nut-3.json');
    // A JSON-only save only needs its own name free: the first stem has no JSON yet.
    const third = await writeTrustReport(t, report, []);
    assert.equal(third[0].slice(dir.length + 1), 'belt_0417.trust.stage4.hex_nut.json');
    assert.equal(readdirSync(dir).length, 1 + 1 + 3 + 2 + 1);
  });
});
