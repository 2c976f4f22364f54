/** What the model reads: an image preprocessed by the model's spec, or a ready tensor (.npy). */
import * as path from 'node:path';
import { readNpy } from '../io/npy';
import { sha256File } from '../io/hash';
import { decodeImage, DecodedImage } from '../image/decode';
import { preprocessImage, Geometry } from '../image/preprocess';
import { UserError } from '../errors';
import type { ModelContext } from './open-model';

export interface ModelInput {
  data: Float32Array;
  path: string;
  sha256: string;
  image?: DecodedImage;
  geometry?: Geometry;
}

export async function imageInput(ctx: ModelContext, file: string): Promise<ModelInput> {
  const image = await decodeImage(file);
  const pre = preprocessImage(image, ctx.spec);
  return { data: pre.data, path: path.resolve(file), sha256: await sha256File(file), image, geometry: pre.geometry };
}

/** A float32 tensor in the model's own layout, skipping preprocessing (--input x.npy). */
export async function tensorInput(ctx: ModelContext, file: string): Promise<ModelInput> {
  const npy = await readNpy(file);
  const want = ctx.pm.inputDims;
  const size = want.reduce((a, b) => a * b, 1);
  if (npy.data.length !== size) throw new UserError(`${file}: shape [${npy.shape.join(',')}] does not match the model input [${want.join(',')}]`);
  return { data: Float32Array.from(npy.data as ArrayLike<number>), path: path.resolve(file), sha256: await sha256File(file) };
}
