import { createHash } from 'crypto';
import { createReadStream } from 'fs';
import { fsUserError } from './fs-errors';

/** SHA-256 of a file's bytes as lowercase hex, streamed so large models are not held in memory. */
export function sha256File(file: string): Promise<string> {
  return new Promise((resolve, reject) => {
    const hash = createHash('sha256');
    const stream = createReadStream(file);
    stream.on('error', (e) => reject(fsUserError(e, 'read', file)));
    stream.on('data', (chunk) => hash.update(chunk));
    stream.on('end', () => resolve(hash.digest('hex')));
  });
}

/** SHA-256 of bytes already in memory, as lowercase hex. */
export function sha256Bytes(data: Uint8Array | string): string {
  return createHash('sha256').update(data).digest('hex');
}
