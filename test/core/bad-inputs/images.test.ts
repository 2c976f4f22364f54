/**
 * Bad and unusual images (issue 7, item 2): each either decodes to the documented 8-bit sRGB form
 * (and preprocesses to a model input) or ends in a one-line UserError naming the file; through the
 * CLI the errors exit 2 with one line on stderr.
 */
import { strict as assert } from 'node:assert';
import { execFileSync, spawnSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import * as zlib from 'node:zlib';
import sharp from 'sharp';
import { decodeImage } from '../../../core/image/decode';
import { exerciseImage } from '../../fuzz/pipeline';
import { rejectsUserError, useTempDir } from '../io/support';
import { DEMO_MODEL } from './model-cases';
import { pngChunk } from '../../helpers';

const ROOT = path.resolve(__dirname, '../../..');
const DEMO_IMAGE = path.join(ROOT, 'test-fixtures/parts/demo/bearing/bearing-0002.png');

/** A PNG whose IHDR claims w×h RGB but whose data is a few bytes: cheap to make, costly to decode if the limit came late. */
function hugePngHeader(w: number, h: number): Buffer {
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(w, 0);
  ihdr.writeUInt32BE(h, 4);
  ihdr[8] = 8;
  ihdr[9] = 2;
  return Buffer.concat([Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]), pngChunk('IHDR', ihdr), pngChunk('IDAT', zlib.deflateSync(Buffer.alloc(256))), pngChunk('IEND', Buffer.alloc(0))]);
}

/** A GIF header (GIF89a: logical screen width/height, u16 little-endian) claiming w×h, with one tiny frame. */
function hugeGifHeader(w: number, h: number): Buffer {
  const head = Buffer.from('GIF89a', 'latin1');
  const screen = Buffer.alloc(7);
  screen.writeUInt16LE(w, 0);
  screen.writeUInt16LE(h, 2);
  screen[4] = 0x80; // global colour table of 2 entries
  const palette = Buffer.from([0, 0, 0, 255, 255, 255]);
  const image = Buffer.from([0x2c, 0, 0, 0, 0, w & 0xff, w >> 8, h & 0xff, h >> 8, 0, 2, 2, 0x4c, 0x01, 0, 0x3b]);
  return Buffer.concat([head, screen, palette, image]);
}

describe('bad and unusual images', () => {
  const tmp = useTempDir('bad-images');
  const file = (name: string) => path.join(tmp(), name);
  const demo = () => sharp(DEMO_IMAGE).resize(40, 30);

  it('truncated files of every format: a one-line UserError naming the file', async () => {
    for (const [ext, enc] of [['png', (s: sharp.Sharp) => s.png()], ['jpg', (s: sharp.Sharp) => s.jpeg()], ['webp', (s: sharp.Sharp) => s.webp()], ['gif', (s: sharp.Sharp) => s.gif()], ['tif', (s: sharp.Sharp) => s.tiff()]] as const) {
      const bytes = await enc(demo()).toBuffer();
      for (const share of [0.05, 0.5, 0.95]) {
        const name = `cut${Math.round(share * 100)}.${ext}`;
        writeFileSync(file(name), bytes.subarray(0, Math.max(1, Math.floor(bytes.length * share))));
        await rejectsUserError(() => exerciseImage(file(name)), name, /truncated or damaged|not a recognised image|cannot decode/);
      }
    }
  });

  it('corrupt data behind a valid header: a one-line UserError naming the file', async () => {
    const png = await demo().png().toBuffer();
    const bad = Buffer.from(png);
    for (let i = 60; i < bad.length - 20; i += 7) bad[i] ^= 0x5a;
    writeFileSync(file('scrambled.png'), bad);
    await rejectsUserError(() => exerciseImage(file('scrambled.png')), 'scrambled.png', /truncated or damaged|cannot decode/);
  });

  it('zero-size and missing files', async () => {
    writeFileSync(file('empty.jpg'), '');
    await rejectsUserError(() => exerciseImage(file('empty.jpg')), 'empty.jpg', /is empty \(0 bytes\)/);
    await rejectsUserError(() => exerciseImage(file('nowhere.png')), 'nowhere.png', /no such file/);
  });

  it('a wrong extension does not matter to a real image; a model named .png is refused', async () => {
    await demo().jpeg().toFile(file('really-a-jpeg.png'));
    const img = await decodeImage(file('really-a-jpeg.png'));
    assert.equal(img.format, 'jpeg');
    writeFileSync(file('model.png'), readFileSync(DEMO_MODEL).subarray(0, 4096));
    await rejectsUserError(() => exerciseImage(file('model.png')), 'model.png', /not a recognised image/);
  });

  it('animated GIF and WebP: the first frame, and the note says so', async () => {
    const red = await sharp({ create: { width: 6, height: 4, channels: 3, background: { r: 255, g: 0, b: 0 } } }).png().toBuffer();
    const blue = await sharp({ create: { width: 6, height: 4, channels: 3, background: { r: 0, g: 0, b: 255 } } }).png().toBuffer();
    for (const [name, enc] of [['anim.gif', (s: sharp.Sharp) => s.gif()], ['anim.webp', (s: sharp.Sharp) => s.webp({ lossless: true })]] as const) {
      await enc(sharp([red, blue, red], { join: { animated: true } })).toFile(file(name));
      assert.equal((await sharp(file(name)).metadata()).pages, 3, `${name} has three frames`);
      const img = await decodeImage(file(name));
      assert.deepEqual([img.width, img.height, img.frames], [6, 4, 3], name);
      assert.deepEqual([...img.rgb.subarray(0, 3)], [255, 0, 0], name);
      assert.match(img.note ?? '', /holds 3 frames; the first is used/, name);
    }
    const still = await decodeImage(DEMO_IMAGE);
    assert.equal(still.note, undefined);
    // The CLI passes the note on: a line on stderr and a field in --json.
    const r = spawnSync(process.execPath, [path.join(ROOT, 'dist/cli.js'), 'predict', file('anim.gif'), '--model', DEMO_MODEL, '--json'], { encoding: 'utf8' });
    assert.equal(r.status, 0, r.stderr);
    assert.match(r.stderr, /^note: .*anim\.gif holds 3 frames; the first is used/m);
    assert.match(JSON.parse(r.stdout).note, /first is used/);
  });

  it('16-bit, CMYK, palette, grey+alpha and RGBA images decode to 8-bit RGB', async () => {
    const cases: [string, (s: sharp.Sharp) => sharp.Sharp, Partial<sharp.Metadata>][] = [
      ['deep.png', (s) => s.toColourspace('rgb16').png(), { depth: 'ushort' }],
      ['cmyk.jpg', (s) => s.toColourspace('cmyk').jpeg(), { space: 'cmyk' }],
      ['palette.png', (s) => s.png({ palette: true, colours: 8 }), { isPalette: true } as Partial<sharp.Metadata>],
      ['grey-alpha.png', (s) => s.toColourspace('b-w').ensureAlpha(0.5).png(), { channels: 2 }],
      ['rgba.png', (s) => s.ensureAlpha(0.3).png(), { channels: 4 }],
    ];
    for (const [name, enc, meta] of cases) {
      await enc(demo()).toFile(file(name));
      const m = await sharp(file(name)).metadata();
      for (const [k, v] of Object.entries(meta)) assert.equal((m as unknown as Record<string, unknown>)[k], v, `${name} test file: ${k}`);
      const r = await exerciseImage(file(name));
      assert.deepEqual([r.width, r.height], [40, 30], name);
    }
  });

  it('a 1×1 image decodes and preprocesses to the model size', async () => {
    await sharp({ create: { width: 1, height: 1, channels: 3, background: { r: 10, g: 200, b: 30 } } }).png().toFile(file('dot.png'));
    const r = await exerciseImage(file('dot.png'));
    assert.deepEqual([r.width, r.height], [1, 1]);
  });

  it('huge images are refused from the header, before any pixel is decoded', async () => {
    // The files claim billions of pixels but hold a few bytes: a full decode would fail as truncated
    // (or exhaust memory), so a pixel-limit message shows the limit was applied first.
    writeFileSync(file('huge.png'), hugePngHeader(120_000, 90_000));
    await rejectsUserError(() => exerciseImage(file('huge.png')), 'huge.png', /120000×90000 is 10800\.0 megapixels, over the limit of 100\.0/, /scale the image down/);
    writeFileSync(file('huge.gif'), hugeGifHeader(65_535, 65_535));
    await rejectsUserError(() => exerciseImage(file('huge.gif')), 'huge.gif', /65535×65535 is 4294\.8 megapixels/);
    // A real image just over a small limit, and just under it.
    await demo().png().toFile(file('small.png'));
    await rejectsUserError(() => exerciseImage(file('small.png'), { maxPixels: 40 * 30 - 1 }), 'small.png', /over the limit/);
    assert.equal((await exerciseImage(file('small.png'), { maxPixels: 40 * 30 })).width, 40);
  });

  it('SVG is refused, also under a raster extension', async () => {
    const svg = '<svg xmlns="http://www.w3.org/2000/svg" width="8" height="8"><rect width="8" height="8" fill="red"/></svg>';
    writeFileSync(file('drawing.svg'), svg);
    writeFileSync(file('drawing.png'), `<?xml version="1.0" encoding="UTF-8"?>\n${svg}`);
    await rejectsUserError(() => exerciseImage(file('drawing.svg')), 'drawing.svg', /vector image \(SVG\)/, /export it as PNG/);
    await rejectsUserError(() => exerciseImage(file('drawing.png')), 'drawing.png', /vector image \(SVG\)/);
  });

  describe('through the CLI', () => {
    before(() => execFileSync(process.execPath, [path.join(ROOT, 'scripts/build.mjs')], { cwd: ROOT }));

    it('predict on bad images: exit 2, one line naming the file, no stack trace', async () => {
      writeFileSync(file('cli-huge.png'), hugePngHeader(50_000, 50_000));
      writeFileSync(file('cli-empty.png'), '');
      writeFileSync(file('cli-cut.jpg'), (await demo().jpeg().toBuffer()).subarray(0, 300));
      writeFileSync(file('cli-vector.svg'), '<svg xmlns="http://www.w3.org/2000/svg" width="2" height="2"/>');
      for (const name of ['cli-huge.png', 'cli-empty.png', 'cli-cut.jpg', 'cli-vector.svg']) {
        const r = spawnSync(process.execPath, [path.join(ROOT, 'dist/cli.js'), 'predict', file(name), '--model', DEMO_MODEL], { encoding: 'utf8' });
        assert.equal(r.status, 2, `${name}: ${r.stderr}`);
        const lines = r.stderr.trimEnd().split('\n');
        assert.equal(lines.length, 1, r.stderr);
        assert.match(lines[0], new RegExp(`^factfoil: .*${name.replace('.', '\\.')}`));
        assert.doesNotMatch(r.stderr, /\n\s+at /);
      }
    });
  });
});
