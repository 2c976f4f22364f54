/**
 * The engine process (DESIGN §3): a Node process forked by the extension that owns every
 * onnxruntime session, so a model that exhausts memory or crashes the runtime takes only this
 * process down. It answers the requests of protocol.ts; `EngineService` holds the logic
 * and is usable in-process (tests), `serveOverIpc` connects it to the parent.
 */
import { promises as fsp, statSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../engine/engine';
import { UserError, isUserError } from '../errors';
import { explainMaps, Estimate, MapResult, Question } from '../methods/maps';
import { openModel, ModelContext } from '../workflow/open-model';
import { imageInput, ModelInput } from '../workflow/model-input';
import { softmax, ranked } from '../workflow/prediction';
import { saveMap } from '../workflow/save-map';
import { expectedLabelFromPath, loadLabels } from '../io/labels';
import { layerShortName } from '../io/naming';
import { readSidecar, writeSidecar, resolvePreprocessSpec, sidecarPath, Sidecar, SidecarPreprocess } from '../io/sidecar';
import { displayRange, DEFAULT_DISPLAY_RANGE } from '../image/normalize';
import { encodePng } from '../image/overlay';
import type { Geometry, PreprocessSpec } from '../image/preprocess';
import { regionFor, runTrustChecks } from '../trust/run';
import { findMask } from '../io/masks';
import type { TrustReport } from '../trust/report';
import {
  ENGINE_PROTOCOL_VERSION, EngineMap, EngineRequest, EngineRequestOf, EngineResultOf, ErrorKind, FromEngine,
  ImageGeometrySummary, ModelSummary, PanelSettings, ViewInfo, checkToEngine,
} from './protocol';

/** Formats a browser shows in an <img>; others get a PNG preview from us. */
const BROWSER_FORMATS = new Set(['png', 'jpeg', 'webp', 'gif', 'avif']);
/** Maps kept per view for saving; older ones are dropped (a panel rarely saves a map 200 steps back). */
const MAPS_KEPT_PER_VIEW = 200;
const PROBE_SEED = 1;

export interface RequestContext {
  signal: AbortSignal;
  progress(done: number, total: number, message?: string): void;
  partial(result: unknown): void;
  log(level: 'info' | 'warning' | 'error', message: string): void;
}

interface View {
  id: string;
  ctx: ModelContext;
  input: ModelInput;
  prediction: { index: number; label: string; p: number }[];
  maps: Map<string, MapResult>;
  nextMap: number;
}

function base64(a: Float32Array): string {
  return Buffer.from(a.buffer, a.byteOffset, a.byteLength).toString('base64');
}

/** The panel's form of a geometry: image_px = offset + model_px · scale. */
export function geometrySummary(g: Geometry): ImageGeometrySummary {
  const scaleX = g.source.width / g.target.width;
  const scaleY = g.source.height / g.target.height;
  return { kind: g.mode, scaleX, scaleY, offsetX: g.source.x - g.target.x * scaleX, offsetY: g.source.y - g.target.y * scaleY };
}

/** The spec as the panel's settings drawer shows it (three values for a grayscale model). */
export function panelSettingsOf(spec: PreprocessSpec, sidecar: Sidecar | undefined): PanelSettings {
  const three = (v: number[]): [number, number, number] => (v.length === 3 ? [v[0], v[1], v[2]] : [v[0], v[0], v[0]]);
  const preprocessing = {
    width: spec.size[1], height: spec.size[0], resize: spec.resize,
    channels: spec.channels === 'BGR' ? 'BGR' as const : 'RGB' as const, layout: spec.layout,
    scale: spec.scale, mean: three(spec.mean), std: three(spec.std),
  };
  return typeof sidecar?.labels === 'string' ? { preprocessing, labelsFile: sidecar.labels } : { preprocessing };
}

/**
 * The sidecar after a panel edit: preprocessing fields replaced (grayscale models keep one
 * channel), fields the panel does not edit (background, resample) kept, labels set to the chosen
 * file (relative to the model's folder when inside it) or kept when the panel names none.
 */
export function sidecarWithSettings(old: Sidecar | undefined, s: PanelSettings, modelPath: string, gray: boolean): Sidecar {
  const p = s.preprocessing;
  const { preset: _preset, ...kept } = old?.preprocess ?? {};
  const preprocess: SidecarPreprocess = {
    ...kept,
    size: [p.height, p.width], resize: p.resize, layout: p.layout, scale: p.scale,
    channels: gray ? 'GRAY' : p.channels,
    mean: gray ? [p.mean[0]] : [...p.mean], std: gray ? [p.std[0]] : [...p.std],
  };
  const out: Sidecar = { format: 'factfoil-model/1', preprocess };
  if (s.labelsFile !== undefined) {
    const dir = path.dirname(path.resolve(modelPath));
    const abs = path.resolve(dir, s.labelsFile);
    const rel = path.relative(dir, abs);
    out.labels = rel && !rel.startsWith('..') && !path.isAbsolute(rel) ? rel.split(path.sep).join('/') : abs;
  } else if (Array.isArray(old?.labels)) {
    out.labels = old!.labels;
  }
  return out;
}

function fileStamp(file: string): string {
  try { const st = statSync(file); return `${st.mtimeMs}:${st.size}`; } catch { return 'none'; }
}

export class EngineService {
  private readonly engine: Engine;
  private readonly contexts = new Map<string, { stamp: string; ctx: Promise<ModelContext> }>();
  private readonly views = new Map<string, View>();
  private nextView = 1;

  constructor(opts: { threads?: number } = {}, private readonly testHooks = false) {
    this.engine = new Engine({ threads: opts.threads ?? 0 });
  }

  async handle(req: EngineRequest, rc: RequestContext): Promise<unknown> {
    switch (req.op) {
      case 'openModel': return this.summary(await this.context(req.model));
      case 'openView': return this.openView(req.model, req.image);
      case 'predict': return { prediction: this.view(req.viewId).prediction };
      case 'maps': return this.maps(req, rc);
      case 'save': return this.save(req);
      case 'updateSettings': return this.updateSettings(req);
      case 'closeView': this.views.delete(req.viewId); return {};
      case 'trust': return this.trust(req, rc);
      case 'crash': return this.crash(req.how);
    }
  }

  /** A model context, reused while neither the model nor its sidecar changed on disk. */
  private context(modelPath: string): Promise<ModelContext> {
    const abs = path.resolve(modelPath);
    const stamp = `${fileStamp(abs)}|${fileStamp(sidecarPath(abs))}`;
    const hit = this.contexts.get(abs);
    if (hit && hit.stamp === stamp) return hit.ctx;
    // Engine.prepare caches by content (sha256): a copy of a model elsewhere gets the first
    // copy's PreparedModel, whose path is the other file. Records, sidecar writes and the summary
    // must name this file, so the context carries this path.
    const ctx = openModel(this.engine, abs).then((c) => (c.pm.model.path === abs ? c : { ...c, pm: { ...c.pm, model: { ...c.pm.model, path: abs } } }));
    this.contexts.set(abs, { stamp, ctx });
    ctx.catch(() => this.contexts.delete(abs));
    return ctx;
  }

  private async summary(ctx: ModelContext): Promise<ModelSummary> {
    const pm = ctx.pm;
    const file = sidecarPath(pm.model.path);
    const sidecar = await readSidecar(pm.model.path);
    return {
      path: path.resolve(pm.model.path), name: path.basename(pm.model.path), sha256: pm.model.sha256,
      input: { name: pm.model.input.name, dims: pm.inputDims, declared: pm.model.input.dims },
      scores: { tensor: pm.scores.tensor, source: pm.scores.source, numClasses: pm.scores.numClasses },
      classes: ctx.labels,
      ...(sidecar ? { sidecar: file } : {}),
      gray: ctx.spec.channels === 'GRAY',
      settings: panelSettingsOf(ctx.spec, sidecar),
      origin: ctx.origin,
      layers: pm.layers.map((l, index) => ({
        index, id: l.id, short: layerShortName(l.id), shape: l.shape, kind: l.kind, grid: l.grid,
        stage: l.isStage, explainable: !l.blockedBy, ...(l.blockedBy ? { blockedBy: l.blockedBy } : {}),
      })),
    };
  }

  private async openView(model: string, image: string, reuseId?: string): Promise<ViewInfo> {
    const ctx = await this.context(model);
    const input = await imageInput(ctx, image);
    const p = softmax(await this.engine.scores(ctx.pm, input.data));
    const prediction = ranked(p, ctx.labels, p.length);
    const id = reuseId ?? `v${process.pid}-${this.nextView++}`;
    const old = this.views.get(id);
    this.views.set(id, { id, ctx, input, prediction, maps: new Map(), nextMap: old?.nextMap ?? 1 });
    const img = input.image!;
    const expected = expectedLabelFromPath(image, ctx.labels);
    return {
      viewId: id,
      summary: await this.summary(ctx),
      image: {
        path: input.path, name: path.basename(input.path), width: img.width, height: img.height, format: img.format,
        geometry: geometrySummary(input.geometry!),
        ...(BROWSER_FORMATS.has(img.format) ? {} : { previewPng: (await encodePng(img.rgb, img.width, img.height)).toString('base64') }),
        ...(img.note ? { note: img.note } : {}),
      },
      prediction,
      ...(expected !== undefined ? { expected } : {}),
    };
  }

  private view(id: string): View {
    const v = this.views.get(id);
    if (!v) throw new UserError(`the engine has no open image '${id}'`, 'close the panel and explain the image again');
    return v;
  }

  private async maps(req: EngineRequestOf<'maps'>, rc: RequestContext): Promise<EngineResultOf<'maps'>> {
    const v = this.view(req.viewId);
    const question: Question = { kind: req.kind, fact: req.fact };
    if (req.kind === 'contrast') { question.foil = req.foil; question.contrast = req.variant === 'loss' ? 'loss' : 'margin'; }
    if (req.kind === 'mismatch') question.mismatch = req.variant === 'gradient' ? 'gradient' : 'weighted';
    const R = v.ctx.pm.scores.numClasses;
    for (const c of [req.fact, req.foil]) if (c !== undefined && c >= R) throw new UserError(`class ${c} is outside the model's ${R} classes`);
    const budgetBytes = req.budgetMiB * 1024 * 1024;
    const run = async (estimate: Estimate, what: string) => {
      if (rc.signal.aborted) throw new UserError('cancelled');
      const results = await explainMaps(this.engine, v.ctx.pm, v.input.data, [question], req.layers, {
        estimate, budgetBytes, signal: rc.signal, onProgress: (done, total) => rc.progress(done, total, what),
      });
      return { maps: results.map((m) => this.remember(v, m)) };
    };
    const probe: Estimate = { mode: 'probe', k: req.probeSeeds, seed: PROBE_SEED };
    if (req.kind !== 'mismatch' || req.estimate === 'exact') return run({ mode: 'exact' }, `exact sweep over all ${R} classes`);
    if (req.estimate === 'probe') return run(probe, `probe estimate with ${req.probeSeeds} seeds`);
    // probe-then-exact: a probe first only when it is cheaper than the exact sweep.
    if (req.probeSeeds < R) rc.partial(await run(probe, `probe estimate with ${req.probeSeeds} seeds`));
    return run({ mode: 'exact' }, `exact sweep over all ${R} classes`);
  }

  private remember(v: View, m: MapResult): EngineMap {
    const mapId = `${v.id}m${v.nextMap++}`;
    v.maps.set(mapId, m);
    if (v.maps.size > MAPS_KEPT_PER_VIEW) v.maps.delete(v.maps.keys().next().value as string);
    const q = m.question;
    const variant = q.kind === 'contrast' ? q.contrast ?? 'margin' : q.kind === 'mismatch' ? q.mismatch ?? 'weighted' : undefined;
    return {
      mapId, kind: q.kind, ...(variant ? { variant } : {}),
      layer: m.layer, layerShort: m.layer === v.ctx.pm.model.input.name ? 'input' : layerShortName(m.layer),
      fact: q.fact, ...(q.foil !== undefined ? { foil: q.foil } : {}),
      width: m.up.width, height: m.up.height, values: base64(m.up.data),
      rawWidth: m.raw.width, rawHeight: m.raw.height, raw: base64(m.raw.data),
      range: displayRange(m.up.data, DEFAULT_DISPLAY_RANGE),
      ...(m.estimate ? { estimate: m.estimate.mode === 'probe' ? { mode: 'probe' as const, k: m.estimate.k } : { mode: 'exact' as const } } : {}),
      ...(m.note ? { note: m.note } : {}),
    };
  }

  private async save(req: EngineRequestOf<'save'>): Promise<EngineResultOf<'save'>> {
    const v = this.view(req.viewId);
    const m = v.maps.get(req.mapId);
    if (!m) throw new UserError('this map is no longer held by the engine (it restarted or the map is old)', 'step to the map again, then save');
    if (req.outDir) await fsp.mkdir(req.outDir, { recursive: true });
    const top = v.prediction.slice(0, Math.min(5, v.prediction.length));
    const out = await saveMap(v.ctx, v.input, m, top, req.outDir, req.includeRaw, { colormap: req.colormap, opacity: req.opacity, range: req.range });
    return { files: [out.png, out.record, ...(out.raw ? [out.raw] : [])] };
  }

  private async updateSettings(req: EngineRequestOf<'updateSettings'>): Promise<ViewInfo> {
    const v = this.view(req.viewId);
    const modelPath = v.ctx.pm.model.path;
    // A malformed sidecar throws here, naming the file and field: reported, never replaced.
    const old = await readSidecar(modelPath);
    const next = sidecarWithSettings(old, req.settings, modelPath, v.ctx.spec.channels === 'GRAY');
    // Check everything the new settings imply before touching the file.
    const where = `the new settings for ${path.basename(modelPath)}`;
    resolvePreprocessSpec(v.ctx.pm.model.input.dims, next.preprocess, where);
    await loadLabels({ modelPath, sidecar: next, metadataProps: v.ctx.pm.model.metadata, numClasses: v.ctx.pm.scores.numClasses });
    await writeSidecar(modelPath, next);
    return this.openView(modelPath, v.input.path, v.id);
  }

  private async trust(req: EngineRequestOf<'trust'>, rc: RequestContext): Promise<TrustReport> {
    const v = this.view(req.viewId);
    const img = v.input.image!;
    // Without a box, the object's mask is looked up by the conventions `factfoil check` uses
    // (<stem>.mask.png beside the image, or a <folder>-masks mirror).
    const maskFile = req.maskFile ?? (req.box || !req.tests.includes('truth') ? undefined : findMask({ file: v.input.path }));
    if (req.tests.includes('truth') && !req.box && !maskFile) {
      throw new UserError(`no object mask found for ${path.basename(v.input.path)}`, `mark the object with a box, or put its mask beside the image as ${path.basename(v.input.path, path.extname(v.input.path))}.mask.png`);
    }
    const region = await regionFor({ box: req.box, maskFile }, { width: img.width, height: img.height });
    return runTrustChecks(this.engine, v.ctx.pm, { data: v.input.data, layout: v.ctx.spec.layout, geometry: v.input.geometry }, {
      tests: req.tests, kinds: req.kinds, layer: req.layer, fact: req.fact, foil: req.foil, region, seed: req.seed,
    }, (done, total, message) => rc.progress(done, total, message), rc.signal);
  }

  private crash(how: 'exit' | 'throw'): never {
    if (!this.testHooks) throw new UserError('the crash request is a test hook and is disabled');
    if (how === 'exit') process.exit(70);
    setImmediate(() => { throw new Error('test hook: uncaught exception in the engine process'); });
    throw new UserError('crashing on request');
  }

  async dispose(): Promise<void> { await this.engine.dispose(); }
}

/** Connects a service to the parent process over the IPC channel. */
export function serveOverIpc(service: EngineService, send: (m: FromEngine) => void, onMessage: (listener: (m: unknown) => void) => void): void {
  const running = new Map<number, AbortController>();
  const v = ENGINE_PROTOCOL_VERSION;
  const log = (level: 'info' | 'warning' | 'error', message: string) => send({ v, type: 'log', level, message: message.slice(0, 20_000) });
  onMessage((raw) => {
    let msg;
    try {
      msg = checkToEngine(raw);
    } catch (e) {
      log('error', `engine dropped a malformed message: ${(e as Error).message}`);
      const id = (raw as { id?: unknown })?.id;
      if (typeof id === 'number' && Number.isInteger(id) && id > 0) send({ v, type: 'error', id, kind: 'internal', message: `malformed request: ${(e as Error).message}` });
      return;
    }
    if (msg.type === 'cancel') { running.get(msg.id)?.abort(); return; }
    const { id, request } = msg;
    const abort = new AbortController();
    running.set(id, abort);
    const started = Date.now();
    const rc: RequestContext = {
      signal: abort.signal,
      progress: (done, total, message) => send({ v, type: 'progress', id, done, total, ...(message ? { message } : {}) }),
      partial: (result) => send({ v, type: 'partial', id, result }),
      log,
    };
    service.handle(request, rc).then(
      (result) => {
        log('info', `${request.op} #${id} done in ${Date.now() - started} ms`);
        send({ v, type: 'result', id, result });
      },
      (e: unknown) => {
        const kind: ErrorKind = abort.signal.aborted ? 'cancelled' : isUserError(e) ? 'user' : 'internal';
        const err = e as Error;
        if (kind === 'internal') log('error', `${request.op} #${id} failed: ${err?.stack ?? String(e)}`);
        send({
          v, type: 'error', id, kind, message: kind === 'cancelled' ? 'cancelled' : err?.message ?? String(e),
          ...(isUserError(e) && e.hint ? { hint: e.hint } : {}), ...(kind === 'internal' && err?.stack ? { stack: err.stack.slice(0, 50_000) } : {}),
        });
      },
    ).finally(() => running.delete(id));
  });
}
