/**
 * Recognises files that are plainly not ONNX by their first bytes, so "you opened a PNG" is said
 * in those words instead of as a protobuf decoding failure. Magic numbers from each format's
 * specification, from memory.
 */
const MAGIC: [string, (b: Uint8Array) => boolean][] = [
  ['a PNG image', (b) => starts(b, [0x89, 0x50, 0x4e, 0x47])],
  ['a JPEG image', (b) => starts(b, [0xff, 0xd8, 0xff])],
  ['a GIF image', (b) => ascii(b, 0, 4) === 'GIF8'],
  ['a WebP image', (b) => ascii(b, 0, 4) === 'RIFF' && ascii(b, 8, 12) === 'WEBP'],
  ['a TIFF image', (b) => ascii(b, 0, 4) === 'II*\0' || ascii(b, 0, 4) === 'MM\0*'],
  ['a PDF document', (b) => ascii(b, 0, 5) === '%PDF-'],
  // PyTorch's torch.save and Keras .keras files are zip archives.
  ['a zip archive (a PyTorch checkpoint or Keras file?)', (b) => starts(b, [0x50, 0x4b, 0x03, 0x04])],
  ['a gzip file', (b) => starts(b, [0x1f, 0x8b])],
  ['an HDF5 file (a Keras .h5 model?)', (b) => starts(b, [0x89, 0x48, 0x44, 0x46])],
  ['a TensorFlow Lite model', (b) => ascii(b, 4, 8) === 'TFL3'],
  ['a Python pickle (a PyTorch checkpoint?)', (b) => b[0] === 0x80 && b[1] >= 2 && b[1] <= 5],
];

function starts(b: Uint8Array, prefix: number[]): boolean {
  return prefix.every((v, i) => b[i] === v);
}
function ascii(b: Uint8Array, from: number, to: number): string {
  return String.fromCharCode(...b.subarray(from, to));
}

/** 'a PNG image', 'a text file', … when the bytes are evidently some other kind of file; else undefined. */
export function sniffFileType(bytes: Uint8Array): string | undefined {
  for (const [what, test] of MAGIC) if (bytes.length >= 8 && test(bytes)) return what;
  // An ONNX file starts with field 1 (ir_version, tag 0x08) in every exporter we know; text never has bytes < 0x09.
  const head = bytes.subarray(0, 256);
  if (head.length >= 8 && head.every((c) => c === 0x09 || c === 0x0a || c === 0x0d || (c >= 0x20 && c !== 0x7f))) {
    const first = String.fromCharCode(head[0]);
    return first === '{' || first === '[' ? 'a JSON text file' : first === '<' ? 'an XML or HTML text file' : 'a text file';
  }
  return undefined;
}
