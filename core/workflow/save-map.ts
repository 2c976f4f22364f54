/** Saving a map the one way both programs save it: PNG + record (+ raw .npy), never overwriting. */
import * as path from 'node:path';
import type { MapResult } from '../methods/maps';
import { mapFileStem, layerShortName, writeUniqueFiles } from '../io/naming';
import { encodeNpy } from '../io/npy';
import { encodeRecord, FactfoilRecord, RECORD_FORMAT } from '../io/record';
import { displayRange, DEFAULT_DISPLAY_RANGE, DisplayRange } from '../image/normalize';
import type { ColormapName } from '../image/colormap';
import { renderOverlayPng, renderMapPng } from '../image/overlay';
import type { ModelContext } from './open-model';
import type { ModelInput } from './model-input';

export const TOOL_VERSION = '0.1.0';

/** How the panel drew a map (its colours and range), so the saved PNG looks like what the user saw. */
export interface SaveDisplay { colormap: ColormapName; opacity: number; range: DisplayRange }

/** Writes a map's PNG and record (and raw .npy) beside the image or into outDir, never overwriting. */
export async function saveMap(ctx: ModelContext, input: ModelInput, m: MapResult, top: { index: number; label: string; p: number }[], outDir: string | undefined, raw: boolean, display?: SaveDisplay) {
  const q = m.question;
  const dir = outDir ? path.resolve(outDir) : path.dirname(input.path);
  const layerShort = m.layer === ctx.pm.model.input.name ? 'input' : layerShortName(m.layer);
  const stem = mapFileStem({ imagePath: input.path, map: q.kind, layerShort, fact: ctx.labels[q.fact], foil: q.foil !== undefined ? ctx.labels[q.foil] : undefined });
  const range = display?.range ?? displayRange(m.up.data, DEFAULT_DISPLAY_RANGE);
  const colormap = display?.colormap ?? 'viridis';
  const opacity = display?.opacity ?? 0.6;
  const png = input.image && input.geometry
    ? await renderOverlayPng(input.image, m.up, input.geometry, { colormap, opacity, range })
    : await renderMapPng(m.up, range, colormap);
  const exts = raw ? ['.png', '.json', '.npy'] : ['.png', '.json'];
  const layerInfo = ctx.pm.layers.find((l) => l.id === m.layer);
  const chosen = await writeUniqueFiles(dir, stem, exts, (c) => {
    const record: FactfoilRecord = {
      format: RECORD_FORMAT, toolVersion: TOOL_VERSION, createdAt: new Date().toISOString(),
      model: { path: path.resolve(ctx.pm.model.path), sha256: ctx.pm.model.sha256, scoresTensor: ctx.pm.scores.tensor, scoresFrom: ctx.pm.scores.source },
      input: input.image
        ? { kind: 'image', path: input.path, sha256: input.sha256, width: input.image.width, height: input.image.height }
        : { kind: 'tensor', path: input.path, sha256: input.sha256, shape: ctx.pm.inputDims },
      preprocess: input.geometry ? { spec: ctx.spec, geometry: input.geometry } : null,
      map: { kind: q.kind, variant: q.kind === 'contrast' ? q.contrast ?? 'margin' : q.kind === 'mismatch' ? q.mismatch ?? 'weighted' : null, layer: { id: m.layer, shape: layerInfo?.shape ?? ctx.pm.inputDims.slice(1) } },
      fact: { index: q.fact, label: ctx.labels[q.fact] },
      foil: q.foil !== undefined ? { index: q.foil, label: ctx.labels[q.foil] } : null,
      estimate: m.estimate ? (m.estimate.mode === 'exact' ? { mode: 'exact' } : { mode: 'probe', k: m.estimate.k, seed: m.estimate.seed, ...(m.estimate.design ? { design: m.estimate.design } : {}) }) : null,
      normalization: display ? { kind: 'fixed', lo: range.lo, hi: range.hi, colormap, opacity } : { kind: 'percentile', p: 99.5, lo: range.lo, hi: range.hi, colormap, opacity },
      prediction: top,
      files: { png: path.basename(c.paths[0]), ...(raw ? { raw: path.basename(c.paths[2]) } : {}) },
    };
    const contents: (Uint8Array | string)[] = [png, encodeRecord(record)];
    if (raw) contents.push(encodeNpy(m.raw.data, [m.raw.height, m.raw.width]));
    return contents;
  });
  return {
    layer: m.layer, map: q.kind, fact: ctx.labels[q.fact], foil: q.foil !== undefined ? ctx.labels[q.foil] : null,
    png: chosen.paths[0], record: chosen.paths[1], raw: raw ? chosen.paths[2] : null, ...(m.note ? { note: m.note } : {}),
  };
}
