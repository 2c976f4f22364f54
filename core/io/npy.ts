/**
 * NumPy .npy files, per the format NumPy documents (numpy.lib.format, "NEP 1"): the magic
 * "\x93NUMPY", a major/minor version byte pair, a little-endian header length (uint16 for 1.0,
 * uint32 for 2.0 and 3.0), and an ASCII (3.0: UTF-8) Python dict literal with keys 'descr',
 * 'fortran_order' and 'shape', padded with spaces and ended by '\n' so that the data starts at
 * a multiple of 64 bytes. We write version 1.0 and read 1.0, 2.0 and 3.0. Only C order.
 */
import { promises as fsp } from 'fs';
import { UserError } from '../errors';
import { writeFileAtomic } from './atomic';
import { fsUserError } from './fs-errors';

export type NpyDtype = '<f4' | '<f8' | '<i8' | '<i4' | '|u1' | '|b1';
export type NpyData = Float32Array | Float64Array | BigInt64Array | Int32Array | Uint8Array;

export interface NpyArray {
  dtype: NpyDtype;
  shape: number[];
  data: NpyData;
}

const MAGIC = Buffer.from([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59]); // \x93NUMPY
const ITEM_SIZE: Record<NpyDtype, number> = { '<f4': 4, '<f8': 8, '<i8': 8, '<i4': 4, '|u1': 1, '|b1': 1 };
/** Spellings NumPy may write for the same dtype ('<u1' and '|i1'-style byte-order marks on 1-byte types). */
const DTYPE_ALIASES: Record<string, NpyDtype> = {
  '<f4': '<f4', '<f8': '<f8', '<i8': '<i8', '<i4': '<i4',
  '|u1': '|u1', '<u1': '|u1', '>u1': '|u1', '|b1': '|b1', '<b1': '|b1', '>b1': '|b1',
};
const HOST_IS_LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/** Reads a .npy file (path) or its bytes (Buffer). `source` names the file in error messages. */
export async function readNpy(input: string | Uint8Array, source?: string): Promise<NpyArray> {
  if (typeof input === 'string') {
    let bytes: Buffer;
    try {
      bytes = await fsp.readFile(input);
    } catch (e) {
      throw fsUserError(e, 'read', input);
    }
    return parseNpy(bytes, input);
  }
  return parseNpy(input, source ?? '.npy data');
}

/** Parses .npy bytes; every malformation is a UserError naming `source`. */
export function parseNpy(input: Uint8Array, source: string): NpyArray {
  const bytes = Buffer.from(input.buffer, input.byteOffset, input.byteLength);
  const bad = (why: string) => new UserError(`${source} is not a valid .npy file: ${why}`, 'write it with numpy.save');
  if (bytes.length < 10 || !bytes.subarray(0, 6).equals(MAGIC)) throw bad('it does not start with the NumPy magic string');
  const major = bytes[6];
  let headerLen: number;
  let headerStart: number;
  if (major === 1) {
    headerLen = bytes.readUInt16LE(8);
    headerStart = 10;
  } else if (major === 2 || major === 3) {
    if (bytes.length < 12) throw bad('the header is cut short');
    headerLen = bytes.readUInt32LE(8);
    headerStart = 12;
  } else {
    throw bad(`format version ${major}.${bytes[7]} is not one we read (1.0, 2.0, 3.0)`);
  }
  const dataStart = headerStart + headerLen;
  if (dataStart > bytes.length) throw bad('the header is cut short');
  const header = bytes.subarray(headerStart, dataStart).toString(major === 3 ? 'utf8' : 'latin1');
  const dict = parseHeaderDict(header, bad);

  const descr = dict.descr;
  if (typeof descr !== 'string') throw bad("the header has no 'descr' string");
  const dtype = DTYPE_ALIASES[descr];
  if (!dtype) {
    throw new UserError(
      `${source}: dtype '${descr}' is not supported`,
      'save as float32 (<f4), float64 (<f8), int64 (<i8), int32 (<i4), uint8 (|u1) or bool (|b1), little-endian',
    );
  }
  if (dict.fortran_order === true) {
    throw new UserError(`${source}: the array is stored in Fortran order`, 'save a C-ordered copy: numpy.save(path, numpy.ascontiguousarray(a))');
  }
  if (dict.fortran_order !== false) throw bad("the header has no boolean 'fortran_order'");
  const shape = dict.shape;
  if (!Array.isArray(shape)) throw bad("the header has no 'shape' tuple");

  const count = shape.reduce((a, b) => a * b, 1);
  const byteLength = count * ITEM_SIZE[dtype];
  if (bytes.length - dataStart < byteLength) {
    throw bad(`the data is cut short (${bytes.length - dataStart} bytes, shape [${shape.join(', ')}] needs ${byteLength})`);
  }
  // Copy into a fresh, aligned buffer: the data offset need not be a multiple of the item size.
  const raw = new Uint8Array(byteLength);
  raw.set(bytes.subarray(dataStart, dataStart + byteLength));
  if (!HOST_IS_LITTLE_ENDIAN) swapBytes(raw, ITEM_SIZE[dtype]);
  return { dtype, shape, data: typedView(dtype, raw.buffer) };
}

/** Encodes a C-ordered array as .npy version 1.0 bytes. */
export function encodeNpy(data: NpyData, shape: readonly number[]): Buffer {
  const dtype = dtypeOf(data);
  const count = shape.reduce((a, b) => a * b, 1);
  if (!shape.every((d) => Number.isInteger(d) && d >= 0)) throw new Error(`encodeNpy: invalid shape [${shape.join(', ')}]`);
  if (count !== data.length) throw new Error(`encodeNpy: shape [${shape.join(', ')}] holds ${count} values, data has ${data.length}`);
  // A 1-tuple needs its trailing comma in Python syntax: (5,)
  const shapeText = shape.length === 1 ? `(${shape[0]},)` : `(${shape.join(', ')})`;
  let header = `{'descr': '${dtype}', 'fortran_order': False, 'shape': ${shapeText}, }`;
  // Pad so magic(6) + version(2) + length(2) + header + '\n' is a multiple of 64 (numpy.lib.format).
  const unpadded = 10 + header.length + 1;
  header += ' '.repeat((64 - (unpadded % 64)) % 64) + '\n';
  if (header.length > 0xffff) throw new Error('encodeNpy: header too long for format version 1.0');
  const head = Buffer.alloc(10);
  MAGIC.copy(head, 0);
  head[6] = 1;
  head[7] = 0;
  head.writeUInt16LE(header.length, 8);
  const body = Buffer.from(new Uint8Array(data.buffer, data.byteOffset, data.byteLength));
  if (!HOST_IS_LITTLE_ENDIAN) swapBytes(body, data.BYTES_PER_ELEMENT);
  return Buffer.concat([head, Buffer.from(header, 'latin1'), body]);
}

export interface WriteNpyOptions {
  /** Replace an existing file (default false: never overwrite, like every file the tool saves). */
  overwrite?: boolean;
}

/** Writes a .npy file atomically (see writeFileAtomic). */
export async function writeNpy(file: string, data: NpyData, shape: readonly number[], opts: WriteNpyOptions = {}): Promise<void> {
  await writeFileAtomic(file, encodeNpy(data, shape), { noOverwrite: !opts.overwrite });
}

function dtypeOf(data: NpyData): NpyDtype {
  if (data instanceof Float32Array) return '<f4';
  if (data instanceof Float64Array) return '<f8';
  if (data instanceof BigInt64Array) return '<i8';
  if (data instanceof Int32Array) return '<i4';
  return '|u1';
}

function typedView(dtype: NpyDtype, buffer: ArrayBuffer): NpyData {
  switch (dtype) {
    case '<f4': return new Float32Array(buffer);
    case '<f8': return new Float64Array(buffer);
    case '<i8': return new BigInt64Array(buffer);
    case '<i4': return new Int32Array(buffer);
    case '|u1':
    case '|b1': return new Uint8Array(buffer);
  }
}

function swapBytes(bytes: Uint8Array, size: number): void {
  if (size === 1) return;
  for (let i = 0; i < bytes.length; i += size) bytes.subarray(i, i + size).reverse();
}

type HeaderValue = string | boolean | number[];

/**
 * Parses the header's Python dict literal. NumPy writes it with repr(), so it holds only string
 * keys, string values, True/False and tuples of non-negative ints; anything else is refused.
 */
function parseHeaderDict(text: string, bad: (why: string) => Error): Record<string, HeaderValue> {
  let i = 0;
  const skip = () => { while (i < text.length && /\s/.test(text[i])) i++; };
  const expect = (ch: string) => {
    skip();
    if (text[i] !== ch) throw bad(`unexpected header text near "${text.slice(i, i + 20)}"`);
    i++;
  };
  const str = (): string => {
    skip();
    const q = text[i];
    if (q !== "'" && q !== '"') throw bad(`expected a quoted string near "${text.slice(i, i + 20)}"`);
    const end = text.indexOf(q, i + 1);
    if (end < 0) throw bad('unterminated string in the header');
    const s = text.slice(i + 1, end);
    i = end + 1;
    return s;
  };
  const value = (): HeaderValue => {
    skip();
    if (text[i] === "'" || text[i] === '"') return str();
    if (text.startsWith('True', i)) { i += 4; return true; }
    if (text.startsWith('False', i)) { i += 5; return false; }
    if (text[i] === '(') {
      i++;
      const dims: number[] = [];
      for (;;) {
        skip();
        if (text[i] === ')') { i++; return dims; }
        const m = /^\d+/.exec(text.slice(i));
        if (!m) throw bad(`invalid shape near "${text.slice(i, i + 20)}"`);
        dims.push(Number(m[0]));
        i += m[0].length;
        skip();
        if (text[i] === ',') i++;
        else if (text[i] !== ')') throw bad(`invalid shape near "${text.slice(i, i + 20)}"`);
      }
    }
    throw bad(`unsupported header value near "${text.slice(i, i + 20)}"`);
  };
  const out: Record<string, HeaderValue> = {};
  expect('{');
  for (;;) {
    skip();
    if (text[i] === '}') break;
    const key = str();
    expect(':');
    out[key] = value();
    skip();
    if (text[i] === ',') i++;
    else if (text[i] !== '}') throw bad(`unexpected header text near "${text.slice(i, i + 20)}"`);
  }
  return out;
}
