/**
 * Image decoding with sharp (libvips) into one form every later step can rely on: 8-bit sRGB,
 * three interleaved channels, EXIF orientation applied, alpha flattened onto a stated background.
 */
import { promises as fsp } from 'fs';
import * as path from 'path';
import sharp from 'sharp';
import { UserError } from '../errors';

export interface DecodedImage {
  width: number;
  height: number;
  /** height × width × 3, row-major, interleaved R,G,B, 8-bit sRGB. */
  rgb: Uint8Array;
  /** Container format: 'png', 'jpeg', 'webp', 'tiff', 'gif', 'avif'. */
  format: string;
  path: string;
  /** Frames or pages in the file (absent: 1); only the first is decoded. */
  frames?: number;
  /** Said to the user when the decode made a choice for them (e.g. the first of several frames). */
  note?: string;
}

export interface DecodeOptions {
  /** Refuse images with more pixels than this, before decoding them (default DEFAULT_MAX_PIXELS). */
  maxPixels?: number;
  /** Colour that transparent pixels are composited onto (default DEFAULT_BACKGROUND, white). */
  background?: [number, number, number];
}

/**
 * 100 megapixels: the decoded RGB alone is 300 MB, far beyond what a classifier input needs.
 * A rule of thumb, no source.
 */
export const DEFAULT_MAX_PIXELS = 100_000_000;

/**
 * White: transparent regions of cut-out product shots and drawings are meant to be seen on a
 * light page, and black would invent dark edges around every object. Common practice, no source.
 */
export const DEFAULT_BACKGROUND: [number, number, number] = [255, 255, 255];

export const SUPPORTED_FORMATS = 'PNG, JPEG, WebP, TIFF, GIF or AVIF';

const RASTER_FORMATS = new Set(['png', 'jpeg', 'webp', 'tiff', 'gif', 'heif']);
const VECTOR_EXTENSIONS = new Set(['.svg', '.svgz', '.pdf', '.eps', '.ps', '.ai', '.emf', '.wmf']);

/** Decodes an image file; every problem with the file is a one-line UserError naming it. */
export async function decodeImage(file: string, opts: DecodeOptions = {}): Promise<DecodedImage> {
  const maxPixels = opts.maxPixels ?? DEFAULT_MAX_PIXELS;
  const background = opts.background ?? DEFAULT_BACKGROUND;
  const head = await readHead(file);
  refuseVector(file, head);

  const { format, frames } = await probeFormat(file, maxPixels);
  let out: { data: Buffer; info: sharp.OutputInfo };
  try {
    out = await openWithSharp(file, maxPixels, format)
      .rotate() // applies and strips the EXIF orientation
      .flatten({ background: { r: background[0], g: background[1], b: background[2] } })
      .toColourspace('srgb') // CMYK (with its ICC profile when present), grey, 16-bit → 8-bit sRGB
      .raw({ depth: 'uchar' })
      .toBuffer({ resolveWithObject: true });
  } catch (e) {
    throw decodeError(file, e);
  }
  const { width, height, channels } = out.info;
  if (channels !== 3) throw new Error(`decodeImage: expected 3 channels from sharp for ${file}, got ${channels}`);
  return {
    width,
    height,
    rgb: new Uint8Array(out.data.buffer, out.data.byteOffset, width * height * 3),
    format,
    path: file,
    frames,
    ...(frames > 1 ? { note: `${file} holds ${frames} ${format === 'tiff' ? 'pages' : 'frames'}; the first is used` } : {}),
  };
}

/**
 * Decodes a mask (object or defect region) as 0/1 per pixel: luminance ≥ 128 is inside. Alpha
 * is flattened onto black, so a cut-out with transparent surroundings also works. When the mask
 * is not `width`×`height` it is resized nearest-neighbour (see resizeMaskNearest).
 */
export async function decodeMask(file: string, width: number, height: number): Promise<Uint8Array> {
  const head = await readHead(file);
  refuseVector(file, head);
  const { format } = await probeFormat(file, DEFAULT_MAX_PIXELS);
  let out: { data: Buffer; info: sharp.OutputInfo };
  try {
    out = await openWithSharp(file, DEFAULT_MAX_PIXELS, format)
      .rotate()
      .flatten({ background: { r: 0, g: 0, b: 0 } })
      .toColourspace('b-w')
      .raw({ depth: 'uchar' })
      .toBuffer({ resolveWithObject: true });
  } catch (e) {
    throw decodeError(file, e);
  }
  const { width: mw, height: mh, channels } = out.info;
  const bits = new Uint8Array(mw * mh);
  for (let i = 0; i < bits.length; i++) bits[i] = out.data[i * channels] >= 128 ? 1 : 0;
  return mw === width && mh === height ? bits : resizeMaskNearest(bits, mw, mh, width, height);
}

/**
 * Nearest-neighbour resize by pixel centres: destination pixel i takes source pixel
 * floor((i + 0.5) · srcSize / dstSize), the same sampling as ONNX Resize nearest with
 * half_pixel coordinates and floor rounding.
 */
export function resizeMaskNearest(src: Uint8Array, sw: number, sh: number, dw: number, dh: number): Uint8Array {
  const out = new Uint8Array(dw * dh);
  const xs = new Int32Array(dw);
  for (let x = 0; x < dw; x++) xs[x] = Math.min(sw - 1, Math.floor(((x + 0.5) * sw) / dw));
  for (let y = 0; y < dh; y++) {
    const sy = Math.min(sh - 1, Math.floor(((y + 0.5) * sh) / dh));
    for (let x = 0; x < dw; x++) out[y * dw + x] = src[sy * sw + xs[x]];
  }
  return out;
}

function openWithSharp(file: string, maxPixels: number, format?: string): sharp.Sharp {
  // failOn 'truncated': refuse cut-off files but accept the harmless warnings many cameras'
  // JPEGs trigger. TIFF needs 'error': a TIFF cut before its JPEG tables otherwise decodes to
  // wrong pixels without complaint (libtiff reports it as an error that 'truncated' lets pass;
  // found by the bad-image suite). pages: 1 reads only the first frame of a GIF, WebP or TIFF.
  return sharp(file, { limitInputPixels: maxPixels, failOn: format === 'tiff' ? 'error' : 'truncated', pages: 1, page: 0 });
}

/** Reads the header only (no pixel decode), checks the format and the pixel limit. */
async function probeFormat(file: string, maxPixels: number): Promise<{ format: string; frames: number }> {
  let meta: sharp.Metadata;
  try {
    meta = await sharp(file, { limitInputPixels: false, pages: 1 }).metadata();
  } catch (e) {
    throw decodeError(file, e);
  }
  const format = meta.format ?? 'unknown';
  if (format === 'svg' || format === 'pdf') throw vectorError(file, format.toUpperCase());
  if (!RASTER_FORMATS.has(format)) {
    throw new UserError(`cannot use ${file}: ${format} images are not supported`, `convert it to ${SUPPORTED_FORMATS}`);
  }
  if (format === 'heif' && meta.compression !== 'av1') {
    throw new UserError(`cannot use ${file}: HEIF images compressed with ${meta.compression ?? 'an unknown codec'} are not supported`, `convert it to ${SUPPORTED_FORMATS}`);
  }
  const w = meta.width ?? 0;
  const h = meta.height ?? 0;
  if (w <= 0 || h <= 0) throw new UserError(`cannot use ${file}: the image has no pixels (${w}×${h})`, 'check the file');
  if (w * h > maxPixels) {
    throw new UserError(
      `cannot use ${file}: ${w}×${h} is ${(w * h / 1e6).toFixed(1)} megapixels, over the limit of ${(maxPixels / 1e6).toFixed(1)}`,
      'scale the image down first (the model sees it at its input size anyway)',
    );
  }
  return { format: format === 'heif' ? 'avif' : format, frames: Math.max(1, meta.pages ?? 1) };
}

async function readHead(file: string): Promise<Buffer> {
  let handle: fsp.FileHandle;
  try {
    const st = await fsp.stat(file);
    if (st.isDirectory()) throw new UserError(`cannot read image ${file}: it is a folder`, 'give an image file');
    if (st.size === 0) throw new UserError(`cannot use ${file}: the file is empty (0 bytes)`, 'check the file');
    handle = await fsp.open(file, 'r');
  } catch (e) {
    if (e instanceof UserError) throw e;
    const code = (e as { code?: string }).code;
    if (code === 'ENOENT') throw new UserError(`cannot read image ${file}: no such file`, 'check the path');
    if (code === 'EACCES' || code === 'EPERM') throw new UserError(`cannot read image ${file}: permission denied`, 'check the file permissions');
    throw e;
  }
  try {
    const buf = Buffer.alloc(512);
    const { bytesRead } = await handle.read(buf, 0, buf.length, 0);
    return buf.subarray(0, bytesRead);
  } finally {
    await handle.close();
  }
}

/** Vector input has no pixel grid of its own; rasterising it at some made-up size would change what the model sees. */
function refuseVector(file: string, head: Buffer): void {
  const ext = path.extname(file).toLowerCase();
  const text = head.toString('latin1').replace(/^\uFEFF|^\xEF\xBB\xBF/, '').trimStart();
  let kind: string | undefined;
  if (text.startsWith('%PDF')) kind = 'PDF';
  else if (text.startsWith('%!PS')) kind = 'PostScript';
  else if (/^<svg[\s>]/i.test(text) || (/^<\?xml/i.test(text) && /<svg[\s>]/i.test(text))) kind = 'SVG';
  else if (VECTOR_EXTENSIONS.has(ext) && !looksRaster(head)) kind = ext.slice(1).toUpperCase();
  if (kind) throw vectorError(file, kind);
}

function vectorError(file: string, kind: string): UserError {
  return new UserError(
    `cannot use ${file}: it is a vector image (${kind}), and models see pixels`,
    'export it as PNG at the size the model expects',
  );
}

/** Magic numbers of the raster formats we read, so a mis-named raster file is not refused as vector. */
function looksRaster(head: Buffer): boolean {
  const h = head.toString('latin1', 0, 12);
  return (
    h.startsWith('\x89PNG') || h.startsWith('\xFF\xD8\xFF') || h.startsWith('GIF8') ||
    h.startsWith('II*\0') || h.startsWith('MM\0*') || (h.startsWith('RIFF') && h.slice(8, 12) === 'WEBP') ||
    h.slice(4, 8) === 'ftyp'
  );
}

/** Turns sharp's error text into a one-line reason. */
function decodeError(file: string, e: unknown): UserError {
  if (e instanceof UserError) return e;
  const raw = e instanceof Error ? e.message : String(e);
  const msg = raw.split('\n')[0].split(file + ': ').join('').replace(/^Input file has corrupt header: /, 'corrupt header: ').trim();
  if (/unsupported image format/i.test(msg)) {
    return new UserError(`cannot use ${file}: not a recognised image, or a damaged one`, `give a ${SUPPORTED_FORMATS} file`);
  }
  if (/exceeds pixel limit/i.test(msg)) {
    return new UserError(`cannot use ${file}: the image is over the pixel limit`, 'scale the image down first, or raise the pixel limit');
  }
  if (/premature end|truncat|unexpected end|end of (file|stream|input)|not enough data|read error|short read|corrupt header|bad seek|unable to parse/i.test(raw)) {
    return new UserError(`cannot decode ${file}: the file is truncated or damaged (${msg})`, 'export or copy the image again');
  }
  return new UserError(`cannot decode ${file}: ${msg}`, 'check that the file is a valid image');
}
