import { UserError } from '../errors';
import { NumericArray, requireDims } from './checks';

/** Memory layout of a batch-1 image tensor: channels first [1,C,H,W] or last [1,H,W,C]. */
export type InputLayout = 'NCHW' | 'NHWC';

/** Offset of channel c of pixel p (row-major over H×W) in a batch-1 tensor of the given layout. */
export function channelStride(layout: InputLayout, pixels: number, channels: number): { pixel: number; channel: number } {
  return layout === 'NCHW' ? { pixel: 1, channel: pixels } : { pixel: channels, channel: 1 };
}

/** The tensor must hold width·height·channels values. */
export function requireInputSize(input: NumericArray, w: number, h: number, channels: number, what: string): void {
  requireDims(w, h, what);
  if (!Number.isInteger(channels) || channels < 1) throw new UserError(`${what}: channels must be a positive integer, got ${channels}`);
  if (input.length !== w * h * channels) {
    throw new UserError(`${what}: a ${channels}×${h}×${w} input needs ${w * h * channels} values, got ${input.length}`);
  }
}
