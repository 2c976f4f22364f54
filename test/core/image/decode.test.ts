import { strict as assert } from 'node:assert';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import * as zlib from 'node:zlib';
import sharp from 'sharp';
import { decodeImage, decodeMask, resizeMaskNearest } from '../../../core/image/decode';
import { rejectsUserError, useTempDir } from '../io/support';
import { pngChunk } from '../../helpers';

/** 8×6 test pattern: four 4×3 quadrants of distinct colours, so lossy codecs keep them recognisable. */
const W = 8, H = 6;
const QUADS = [[220, 30, 30], [30, 200, 40], [40, 50, 210], [240, 240, 20]];
function pattern(): Buffer {
  const out = Buffer.alloc(W * H * 3);
  for (let y = 0; y < H; y++) for (let x = 0; x < W; x++) out.set(QUADS[(y < H / 2 ? 0 : 2) + (x < W / 2 ? 0 : 1)], (y * W + x) * 3);
  return out;
}
const raw = (buf: Buffer, width = W, height = H, channels: 1 | 3 | 4 = 3) => sharp(buf, { raw: { width, height, channels } });

function maxAbsDiff(a: Uint8Array, b: Uint8Array): number {
  assert.equal(a.length, b.length);
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i] - b[i]));
  return m;
}

/** A PNG whose IHDR claims `w`×`h` but holds almost no data (PNG spec: signature, IHDR, IDAT chunks). */
function pngHeaderOnly(w: number, h: number): Buffer {
  const ihdr = Buffer.alloc(13);
  ihdr.writeUInt32BE(w, 0);
  ihdr.writeUInt32BE(h, 4);
  ihdr[8] = 8; // bit depth
  ihdr[9] = 2; // colour type RGB
  return Buffer.concat([Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]), pngChunk('IHDR', ihdr), pngChunk('IDAT', zlib.deflateSync(Buffer.alloc(64)))]);
}

describe('core/image/decode', () => {
  const tmp = useTempDir('decode');
  const file = (name: string) => path.join(tmp(), name);

  it('decodes PNG, TIFF, lossless WebP and GIF exactly, JPEG and AVIF closely', async () => {
    const src = pattern();
    const cases: [string, (s: sharp.Sharp) => sharp.Sharp, string, number][] = [
      ['p.png', (s) => s.png(), 'png', 0],
      ['p.tif', (s) => s.tiff({ compression: 'lzw' }), 'tiff', 0],
      ['p.webp', (s) => s.webp({ lossless: true }), 'webp', 0],
      ['p.gif', (s) => s.gif(), 'gif', 0], // 4 colours fit the palette exactly
      ['p.jpg', (s) => s.jpeg({ quality: 95, chromaSubsampling: '4:4:4' }), 'jpeg', 40],
      ['p.avif', (s) => s.avif({ quality: 90 }), 'avif', 60],
    ];
    for (const [name, encode, format, tol] of cases) {
      await encode(raw(src)).toFile(file(name));
      const img = await decodeImage(file(name));
      assert.equal(img.format, format, name);
      assert.deepEqual([img.width, img.height, img.rgb.length], [W, H, W * H * 3], name);
      const d = maxAbsDiff(img.rgb, src);
      assert.ok(d <= tol, `${name}: max diff ${d} > ${tol}`);
      assert.equal(img.path, file(name));
    }
  });

  it('takes the first frame of an animated GIF', async () => {
    const red = await sharp({ create: { width: 4, height: 4, channels: 3, background: { r: 255, g: 0, b: 0 } } }).png().toBuffer();
    const blue = await sharp({ create: { width: 4, height: 4, channels: 3, background: { r: 0, g: 0, b: 255 } } }).png().toBuffer();
    await sharp([red, blue], { join: { animated: true } }).gif().toFile(file('anim.gif'));
    assert.equal((await sharp(file('anim.gif')).metadata()).pages, 2, 'the test file has two frames');
    const img = await decodeImage(file('anim.gif'));
    assert.deepEqual([img.width, img.height], [4, 4]);
    assert.deepEqual([...img.rgb.subarray(0, 3)], [255, 0, 0]);
  });

  it('expands grayscale to three equal channels', async () => {
    await raw(Buffer.from([0, 50, 100, 200]), 2, 2, 1).toColourspace('b-w').png().toFile(file('g.png'));
    assert.equal((await sharp(file('g.png')).metadata()).channels, 1, 'the test file is single-channel');
    const img = await decodeImage(file('g.png'));
    assert.deepEqual([...img.rgb], [0, 0, 0, 50, 50, 50, 100, 100, 100, 200, 200, 200]);
  });

  it('reduces 16-bit samples to 8 bits by their high byte', async () => {
    // v16 = v8·257 is exact under any rescaling; v8·256 + 255 shows the high-byte rule (libvips, as Pillow does for RGB).
    const levels = [0, 1, 127, 128, 254, 255];
    const u16 = new Uint16Array(levels.flatMap((v) => [v * 257, v * 256 + 255, v * 257]));
    await sharp(u16, { raw: { width: levels.length, height: 1, channels: 3 } }).toColourspace('rgb16').png().toFile(file('p16.png'));
    assert.equal((await sharp(file('p16.png')).metadata()).depth, 'ushort', 'the test file is 16-bit');
    const img = await decodeImage(file('p16.png'));
    assert.deepEqual([...img.rgb], levels.flatMap((v) => [v, v, v]));
  });

  it('converts CMYK JPEG and TIFF to sRGB', async () => {
    const colours = [[255, 255, 255], [0, 0, 0], [200, 30, 30], [30, 160, 60], [40, 60, 200]];
    const strip = raw(Buffer.from(colours.flat()), colours.length, 1).resize(colours.length * 8, 8, { kernel: 'nearest' }).toColourspace('cmyk');
    await strip.clone().jpeg({ quality: 100, chromaSubsampling: '4:4:4' }).toFile(file('c.jpg'));
    await strip.clone().tiff().toFile(file('c.tif'));
    for (const name of ['c.jpg', 'c.tif']) {
      const meta = await sharp(file(name)).metadata();
      assert.deepEqual([meta.space, meta.channels], ['cmyk', 4], `${name} is CMYK`);
      const img = await decodeImage(file(name));
      const at = (i: number) => [...img.rgb.subarray((4 * img.width + i * 8 + 4) * 3, (4 * img.width + i * 8 + 4) * 3 + 3)];
      // No ink is paper white; full ink is near black (CMYK round trips lose gamut, so the
      // chromatic patches are only checked for their dominant channel).
      assert.deepEqual(at(0), [255, 255, 255], name);
      assert.ok(Math.max(...at(1)) < 24, `${name} black → ${at(1)}`);
      for (const [i, ch] of [[2, 0], [3, 1], [4, 2]]) {
        const px = at(i);
        assert.equal(px.indexOf(Math.max(...px)), ch, `${name} patch ${i} → ${px}`);
      }
    }
  });

  it('flattens alpha onto white by default, or onto the given background', async () => {
    // Straight alpha compositing: out = α·c + (1 − α)·bg.
    const rgba = Buffer.from([10, 20, 30, 255, 10, 20, 30, 0, 200, 100, 0, 128]);
    await raw(rgba, 3, 1, 4).png().toFile(file('a.png'));
    const white = await decodeImage(file('a.png'));
    assert.deepEqual([...white.rgb.subarray(0, 6)], [10, 20, 30, 255, 255, 255]);
    const a = 128 / 255;
    const expect = [200, 100, 0].map((c) => c * a + 255 * (1 - a));
    for (let c = 0; c < 3; c++) assert.ok(Math.abs(white.rgb[6 + c] - expect[c]) <= 1, `blend ${white.rgb[6 + c]} vs ${expect[c]}`);
    const black = await decodeImage(file('a.png'), { background: [0, 0, 0] });
    assert.deepEqual([...black.rgb.subarray(3, 6)], [0, 0, 0]);
  });

  it('applies the EXIF orientation (6: rotate 90° clockwise to view)', async () => {
    // Reference: EXIF 2.3 Orientation tag, value 6 = the 0th row is the visual right side (from memory).
    // Stored: left half red, right half blue, 16×8. Viewed: 8×16, top half red, bottom half blue.
    const buf = Buffer.alloc(16 * 8 * 3);
    for (let y = 0; y < 8; y++) for (let x = 0; x < 16; x++) buf.set(x < 8 ? [230, 20, 20] : [20, 20, 230], (y * 16 + x) * 3);
    await raw(buf, 16, 8).jpeg({ quality: 95 }).withMetadata({ orientation: 6 }).toFile(file('rot.jpg'));
    assert.equal((await sharp(file('rot.jpg')).metadata()).orientation, 6);
    const img = await decodeImage(file('rot.jpg'));
    assert.deepEqual([img.width, img.height], [8, 16]);
    const px = (x: number, y: number) => [...img.rgb.subarray((y * 8 + x) * 3, (y * 8 + x) * 3 + 3)];
    assert.ok(px(4, 2)[0] > 180 && px(4, 2)[2] < 80, `top is red: ${px(4, 2)}`);
    assert.ok(px(4, 13)[2] > 180 && px(4, 13)[0] < 80, `bottom is blue: ${px(4, 13)}`);
  });

  it('refuses SVG and PDF, naming the file and what to do', async () => {
    writeFileSync(file('v.svg'), '<svg xmlns="http://www.w3.org/2000/svg" width="4" height="4"><rect width="4" height="4"/></svg>');
    writeFileSync(file('x.png'), '<?xml version="1.0"?>\n<svg xmlns="http://www.w3.org/2000/svg" width="4" height="4"/>');
    writeFileSync(file('d.pdf'), '%PDF-1.4\n%âãÏÓ\n1 0 obj\n<<>>\nendobj\n');
    await rejectsUserError(() => decodeImage(file('v.svg')), 'v.svg', /vector image \(SVG\)/, /export it as PNG/);
    await rejectsUserError(() => decodeImage(file('x.png')), 'x.png', /vector image \(SVG\)/);
    await rejectsUserError(() => decodeImage(file('d.pdf')), 'd.pdf', /vector image \(PDF\)/);
  });

  it('refuses empty, truncated, corrupt and unknown files with a one-line reason', async () => {
    await raw(pattern()).png().toFile(file('full.png'));
    await raw(pattern()).jpeg().toFile(file('full.jpg'));
    const png = readFileSync(file('full.png'));
    const jpg = readFileSync(file('full.jpg'));
    writeFileSync(file('empty.png'), '');
    writeFileSync(file('cut.png'), png.subarray(0, Math.floor(png.length * 0.6)));
    writeFileSync(file('cut.jpg'), jpg.subarray(0, Math.floor(jpg.length * 0.6)));
    writeFileSync(file('noise.png'), Buffer.from(Array.from({ length: 300 }, (_, i) => (i * 73 + 11) % 256)));
    writeFileSync(file('notes.txt'), 'hello, these are not pixels\n');
    mkdirSync(file('folder.png'));
    for (const [ext, enc] of [['webp', (x: sharp.Sharp) => x.webp()], ['gif', (x: sharp.Sharp) => x.gif()], ['avif', (x: sharp.Sharp) => x.avif()], ['tif', (x: sharp.Sharp) => x.tiff()]] as const) {
      const bytes = await enc(raw(pattern())).toBuffer();
      writeFileSync(file(`cut.${ext}`), bytes.subarray(0, Math.floor(bytes.length * 0.6)));
      await rejectsUserError(() => decodeImage(file(`cut.${ext}`)), `cut.${ext}`, /truncated or damaged|damaged one/);
    }
    await rejectsUserError(() => decodeImage(file('empty.png')), 'empty.png', /empty \(0 bytes\)/);
    await rejectsUserError(() => decodeImage(file('cut.png')), 'cut.png', /truncated or damaged/);
    await rejectsUserError(() => decodeImage(file('cut.jpg')), 'cut.jpg', /truncated or damaged/);
    await rejectsUserError(() => decodeImage(file('noise.png')), 'noise.png', /not a recognised image/);
    await rejectsUserError(() => decodeImage(file('notes.txt')), 'notes.txt', /not a recognised image/);
    await rejectsUserError(() => decodeImage(file('missing.png')), 'missing.png', /no such file/);
    await rejectsUserError(() => decodeImage(file('folder.png')), 'folder.png', /folder/);
  });

  it('refuses images over the pixel limit from the header alone', async () => {
    // 100000 × 100000 claimed, 64 bytes of data: a full decode would fail as truncated (or
    // exhaust memory), so a pixel-limit message proves the check ran before decoding.
    writeFileSync(file('huge.png'), pngHeaderOnly(100_000, 100_000));
    await rejectsUserError(() => decodeImage(file('huge.png')), 'huge.png', /10000\.0 megapixels, over the limit of 100\.0/);
    await raw(pattern()).png().toFile(file('small.png'));
    await rejectsUserError(() => decodeImage(file('small.png'), { maxPixels: 40 }), 'small.png', /over the limit/);
    assert.equal((await decodeImage(file('small.png'), { maxPixels: 48 })).width, W);
  });

  it('decodes masks as 0/1 at luminance 128 and resizes them nearest-neighbour', async () => {
    await raw(Buffer.from([0, 127, 128, 255]), 2, 2, 1).toColourspace('b-w').png().toFile(file('m.png'));
    assert.deepEqual([...(await decodeMask(file('m.png'), 2, 2))], [0, 0, 1, 1]);
    assert.deepEqual([...(await decodeMask(file('m.png'), 4, 2))], [0, 0, 0, 0, 1, 1, 1, 1]);
    // Transparent surroundings count as outside.
    await raw(Buffer.from([255, 255, 255, 0, 255, 255, 255, 255]), 2, 1, 4).png().toFile(file('cut-out.png'));
    assert.deepEqual([...(await decodeMask(file('cut-out.png'), 2, 1))], [0, 1]);
  });

  it('samples pixel centres when resizing a mask (floor((i + 0.5)·src/dst))', () => {
    const src = Uint8Array.from([1, 0, 0, 1, 1, 0]); // 6×1
    assert.deepEqual([...resizeMaskNearest(src, 6, 1, 3, 1)], [0, 1, 0]); // centres 1, 3, 5
    assert.deepEqual([...resizeMaskNearest(Uint8Array.from([1, 0]), 2, 1, 5, 1)], [1, 1, 0, 0, 0]); // centres 0.2, 0.6, 1.0, 1.4, 1.8
  });
});
