/** `factfoil explain`: maps for one or more images, saved beside each image with their records. */
import { readdirSync, statSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../engine/engine';
import { UserError } from '../errors';
import { explainMaps, MapKind, MAP_KINDS, Question, Estimate } from '../methods/maps';
import { PROBE_DESIGNS, type ProbeDesign } from '../methods/mismatch-seeds';
import { openModelNoting } from './open';
import { imageInput, tensorInput, ModelInput } from '../workflow/model-input';
import { softmax, ranked } from '../workflow/prediction';
import { saveMap } from '../workflow/save-map';
import { resolveClass, expectedLabelFromPath } from '../io/labels';
import { ensureOutputFolder } from '../io/atomic';
import { CliArgs, modelPath, resolveLayer } from './args';

const IMAGE_EXT = /\.(png|jpe?g|webp|tiff?|gif|avif)$/i;

function expandImages(items: string[]): string[] {
  const out: string[] = [];
  for (const item of items) {
    let st;
    try { st = statSync(item); } catch { throw new UserError(`cannot read image ${item}`, 'check the path'); }
    if (st.isDirectory()) {
      for (const e of readdirSync(item).sort()) {
        const p = path.join(item, e);
        if (statSync(p).isDirectory()) out.push(...expandImages([p]));
        else if (IMAGE_EXT.test(e) && !/\.(evidence|contrast|mismatch|expectancy|detail|guided-evidence)\./.test(e)) out.push(p);
      }
    } else out.push(item);
  }
  return out;
}

function parseEstimate(arg: string | undefined): Estimate {
  if (!arg || arg === 'exact') return { mode: 'exact' };
  const m = /^probe:(\d+)(?::([a-z]+))?$/.exec(arg);
  if (!m || Number(m[1]) < 1) throw new UserError(`--estimate must be exact or probe:<K>[:<design>], not '${arg}'`);
  const design = m[2] as ProbeDesign | undefined;
  if (design && !PROBE_DESIGNS.includes(design)) throw new UserError(`unknown probe design '${design}'`, `choose from ${PROBE_DESIGNS.join(', ')}`);
  return { mode: 'probe', k: Number(m[1]), seed: 1, ...(design ? { design } : {}) };
}

export async function explainCommand(engine: Engine, args: CliArgs): Promise<number> {
  const v = args.values;
  if (v.out) ensureOutputFolder(v.out);
  const ctx = await openModelNoting(engine, modelPath(args), v.labels);
  const kinds = (v.map ?? 'contrast').split(',') as MapKind[];
  for (const k of kinds) if (!MAP_KINDS.includes(k)) throw new UserError(`unknown map kind '${k}'`, `choose from ${MAP_KINDS.join(', ')}`);
  const contrast = (v.contrast ?? 'margin') as 'margin' | 'loss';
  const mismatch = (v.mismatch ?? 'weighted') as 'weighted' | 'gradient';
  if (!['margin', 'loss'].includes(contrast)) throw new UserError(`--contrast must be margin or loss`);
  if (!['weighted', 'gradient'].includes(mismatch)) throw new UserError(`--mismatch must be weighted or gradient`);
  const layers = resolveLayer(ctx.pm, v.layer ?? 'stages');
  const estimate = parseEstimate(v.estimate);
  const files = v.input ? [v.input] : expandImages(args.positionals);
  if (!files.length) throw new UserError('missing <image>', 'pass one or more images or folders');
  const abort = new AbortController();
  const onInt = () => abort.abort();
  process.once('SIGINT', onInt);
  const outputs: unknown[] = [];
  const images: { image: string; expected: string | null; prediction: unknown; note?: string }[] = [];
  // Over several images (a CI folder run) an unreadable image is reported and skipped, so one
  // bad file does not hide the maps of the rest; the run still exits 2 at the end.
  const skipped: { image: string; error: string }[] = [];
  let prediction: unknown;
  try {
    for (const file of files) {
      let input: ModelInput;
      try {
        input = v.input ? await tensorInput(ctx, file) : await imageInput(ctx, file);
      } catch (e) {
        if (!(e instanceof UserError) || files.length === 1) throw e;
        skipped.push({ image: path.resolve(file), error: e.oneLine() });
        process.stderr.write(`${e.oneLine()} (skipped)\n`);
        continue;
      }
      if (input.image?.note) process.stderr.write(`note: ${input.image.note}\n`);
      const p = softmax(await engine.scores(ctx.pm, input.data));
      const top = ranked(p, ctx.labels, Math.min(5, p.length));
      prediction = top;
      const fact = v.fact !== undefined ? resolveClass(v.fact, ctx.labels, 'fact') : top[0].index;
      const expected = input.image ? expectedLabelFromPath(file, ctx.labels) : undefined;
      const foil = v.foil !== undefined ? resolveClass(v.foil, ctx.labels, 'foil')
        : expected !== undefined && expected !== fact ? expected : top.find((t) => t.index !== fact)!.index;
      const questions: Question[] = kinds.map((kind) => ({ kind, fact, foil: kind === 'contrast' ? foil : undefined, contrast, mismatch }));
      const tty = process.stderr.isTTY;
      const started = Date.now();
      const maps = await explainMaps(engine, ctx.pm, input.data, questions, layers, {
        estimate, signal: abort.signal,
        onProgress: tty ? (done, total) => {
          const eta = ((Date.now() - started) / done) * (total - done) / 1000;
          process.stderr.write(`\r  seeds ${done}/${total}  ETA ${eta.toFixed(1)} s   `);
          if (done === total) process.stderr.write('\n');
        } : undefined,
      });
      for (const m of maps) outputs.push({ image: input.path, ...(await saveMap(ctx, input, m, top, v.out, v.raw ?? false)) });
      images.push({ image: input.path, expected: expected !== undefined ? ctx.labels[expected] : null, prediction: top, ...(input.image?.note ? { note: input.image.note } : {}) });
      process.stderr.write(`${file}: ${ctx.labels[fact]} (${(100 * p[fact]).toFixed(1)}%), ${maps.length} maps\n`);
    }
  } catch (e) {
    if (abort.signal.aborted) throw new UserError('stopped by Ctrl-C; nothing half-written');
    throw e;
  } finally {
    process.off('SIGINT', onInt);
  }
  if (v.json) process.stdout.write(JSON.stringify({ outputs, prediction, images, skipped }) + '\n');
  if (skipped.length) {
    process.stderr.write(`${skipped.length} of ${files.length} images could not be read; the others were explained\n`);
    return 2;
  }
  return 0;
}
