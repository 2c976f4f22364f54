/** Small shared test utilities. */
import * as path from 'node:path';
import * as zlib from 'node:zlib';

export const FIXTURES = path.resolve(__dirname, '..', 'test-fixtures');

/** Relative L2 error ‖a−b‖/‖b‖. */
export function relL2(a: ArrayLike<number>, b: ArrayLike<number>): number {
  if (a.length !== b.length) throw new Error(`length ${a.length} vs ${b.length}`);
  let num = 0, den = 0;
  for (let i = 0; i < a.length; i++) { num += (a[i] - b[i]) ** 2; den += b[i] ** 2; }
  return Math.sqrt(num / Math.max(den, 1e-300));
}

export function toNumbers(a: ArrayLike<number | bigint>): number[] {
  return Array.from(a as ArrayLike<number>, Number);
}

/** One PNG chunk (PNG spec: length, type, data, CRC-32 over type+data), for hand-made test PNGs. */
export function pngChunk(type: string, data: Buffer): Buffer {
  const len = Buffer.alloc(4);
  len.writeUInt32BE(data.length);
  const td = Buffer.concat([Buffer.from(type, 'latin1'), data]);
  const crc = Buffer.alloc(4);
  crc.writeUInt32BE(zlib.crc32(td) >>> 0);
  return Buffer.concat([len, td, crc]);
}
