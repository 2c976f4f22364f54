/**
 * The host side of one panel: checks every message from the webview with the shared validator
 * (unknown or malformed ones are dropped and logged), turns requests into engine requests,
 * and answers with the protocol's messages (checked too before they are posted). It holds the
 * engine's view of (model, image) and reopens it after the engine process restarted.
 * No vscode import: the window's parts it needs come in as PanelUi.
 */
import * as path from 'node:path';
import type { EngineMap, ViewInfo } from '../core/engine-process/protocol';
import type { EngineLike, EngineRequestError } from './engine-client';
import {
  FromWebview, InitMessage, LayerInfo, MapData, PROTOCOL_VERSION, PanelImage, ToWebview, checkFromWebview, checkToWebview,
} from '../webview/protocol';
import { FactfoilSettings, estimatePlan } from './settings';
import type { TrustReport } from '../core/trust/report';
import { isPng, writeTrustReport } from '../core/trust/report-files';
import { findMask } from '../core/io/masks';

export interface ProgressHandle {
  report(done: number, total: number, message?: string): void;
  end(): void;
}

export interface PanelUi {
  /** A cancellable progress notification for long exact sweeps, shown while the panel is out of sight. */
  startProgress(title: string, onCancel: () => void): ProgressHandle;
  /** Tell the user where the files went, with a way to reveal them. */
  saved(files: string[], message: string): void;
  reveal(file: string): void;
  pickLabelsFile(modelDir: string): Promise<string | undefined>;
  /** The URI the webview loads the image from (a webview resource URI, or data: for a preview PNG). */
  imageUri(view: ViewInfo): string;
}

export interface RelayLog {
  info(message: string): void;
  warn(message: string): void;
  error(message: string): void;
}

export interface PanelTarget { model: string; image: string }

export interface RelayDeps {
  engine: EngineLike;
  target: PanelTarget;
  post(message: ToWebview): void;
  ui: PanelUi;
  log: RelayLog;
  settings(): FactfoilSettings;
  /** Where saved maps go for this image: undefined = beside it. */
  saveFolder(image: string): string | undefined;
  /** Whether the panel's model opened on its image: the host remembers only a model that loads. */
  opened?(ok: boolean): void;
}

/** The panel's form of the engine's view: image, classes, layers (explainable ones only), settings. */
export function initMessage(view: ViewInfo, imageUri: string, settings: FactfoilSettings): InitMessage {
  const s = view.summary;
  const layers: LayerInfo[] = s.layers.filter((l) => l.explainable).map((l) => ({
    id: l.id, short: l.short, gridWidth: l.grid[1], gridHeight: l.grid[0], stage: l.stage,
  }));
  return {
    type: 'init', version: PROTOCOL_VERSION,
    model: { name: s.name, scores: s.scores.tensor },
    image: panelImage(view, imageUri),
    labels: s.classes, prediction: view.prediction,
    ...(view.expected !== undefined ? { expected: view.expected } : {}),
    layers, settings: s.settings, origin: s.origin, gray: s.gray,
    defaults: { kind: settings.defaultMapKind, colormap: settings.colormap, estimate: settings.estimate },
  };
}

function panelImage(view: ViewInfo, uri: string): PanelImage {
  return { uri, name: view.image.name, width: view.image.width, height: view.image.height, geometry: view.image.geometry };
}

export function mapData(m: EngineMap): MapData {
  return m;
}

/**
 * The engine's hints are worded for both programs; in the editor a limit it names is a setting,
 * so the hint says which one.
 */
export function editorHint(hint: string): string {
  return hint.replace(/\braise the memory budget\b(?! \()/, 'raise the memory budget (setting Factfoil: Memory Budget MB, factfoil.memoryBudgetMB)');
}

/** "Saved washer-0001.contrast.stage4.washer-vs-bearing.png and its record beside the image." */
export function savedMessage(files: string[], image: string): string {
  const png = files.find((f) => f.endsWith('.png'));
  if (!png) return `Saved ${files.length} files.`;
  const where = path.dirname(png) === path.dirname(image) ? 'beside the image' : `in ${path.dirname(png)}`;
  const extra = files.some((f) => f.endsWith('.npy')) ? ', its record and the raw map' : ' and its record';
  return `Saved ${path.basename(png)}${extra} ${where}.`;
}

export class PanelRelay {
  private view?: ViewInfo;
  private viewGeneration = -1;
  private opening?: Promise<ViewInfo>;
  /** Webview request id → engine request id, for cancel. */
  private readonly running = new Map<number, number>();
  /** Files this panel saved: the only paths `reveal` may show. */
  private readonly savedFiles = new Set<string>();
  /** Labels files the user chose in this host's dialog: the only new paths a settings change may name. */
  private readonly pickedLabels = new Set<string>();
  /** Trust reports this panel received, by request id (the last few), for Save: the JSON is never taken from the webview. */
  private readonly trustReports = new Map<number, TrustReport>();
  private disposed = false;

  constructor(private readonly d: RelayDeps) {}

  /** Entry point for every message the webview posts. */
  receive(raw: unknown): void {
    const checked = checkFromWebview(raw);
    if (!checked.ok) {
      this.d.log.warn(`dropped a malformed message from the panel: ${checked.reason}`);
      return;
    }
    void this.handle(checked.message).catch((e) => this.d.log.error(`panel message ${checked.message.type} failed: ${(e as Error).stack ?? e}`));
  }

  /** The engine process died: the view is gone with it, the panel hears why. */
  engineStopped(message: string, hint?: string): void {
    this.viewGeneration = -1;
    this.post({ type: 'notice', level: 'error', message, ...(hint ? { hint } : {}) });
  }

  dispose(): void {
    this.disposed = true;
    for (const engineId of this.running.values()) this.d.engine.cancel(engineId);
    this.running.clear();
    if (this.view && this.viewGeneration === this.d.engine.generation) {
      this.d.engine.request({ op: 'closeView', viewId: this.view.viewId }).result.catch(() => undefined);
    }
  }

  private post(m: ToWebview): void {
    if (this.disposed) return;
    const checked = checkToWebview(m);
    if (!checked.ok) {
      this.d.log.error(`not sending a malformed ${m.type} message to the panel: ${checked.reason}`);
      return;
    }
    this.d.post(m);
  }

  /** The engine's view, opened again when the engine restarted since. */
  private ensureView(): Promise<ViewInfo> {
    if (this.view && this.viewGeneration === this.d.engine.generation) return Promise.resolve(this.view);
    if (!this.opening) {
      const req = this.d.engine.request({ op: 'openView', model: this.d.target.model, image: this.d.target.image });
      this.opening = req.result.then((v) => {
        this.view = v;
        this.viewGeneration = this.d.engine.generation;
        return v;
      }).finally(() => { this.opening = undefined; });
    }
    return this.opening;
  }

  private fail(id: number, e: unknown): void {
    const err = e as EngineRequestError;
    const kind = err?.kind;
    if (kind === 'stopped') this.viewGeneration = -1;
    if (kind === 'internal' || kind === undefined) this.d.log.error(`request ${id} failed: ${err?.stack ?? e}`);
    this.post({
      type: 'failed', id, message: String(err?.message ?? e).slice(0, 2000),
      ...(err?.hint ? { hint: editorHint(err.hint).slice(0, 2000) } : kind === 'internal' ? { hint: 'Details are in the Factfoil output channel.' } : {}),
      ...(kind === 'cancelled' ? { cancelled: true } : {}),
    });
  }

  private async handle(m: FromWebview): Promise<void> {
    switch (m.type) {
      case 'ready': return this.onReady();
      case 'requestMaps': return this.onMaps(m);
      case 'save': return this.onSave(m);
      case 'updateSettings': return this.onSettings(m);
      case 'pickLabelsFile': {
        const file = await this.d.ui.pickLabelsFile(path.dirname(this.d.target.model));
        if (file) this.pickedLabels.add(file);
        this.post({ type: 'labelsFileResult', id: m.id, ...(file ? { path: file } : {}) });
        return;
      }
      case 'cancel': {
        const engineId = this.running.get(m.id);
        if (engineId !== undefined) this.d.engine.cancel(engineId);
        return;
      }
      case 'reveal':
        if (this.savedFiles.has(m.path)) this.d.ui.reveal(m.path);
        else this.d.log.warn(`the panel asked to reveal ${m.path}, which it did not save; ignored`);
        return;
      case 'log': {
        const line = `[panel] ${m.message}`;
        if (m.level === 'error') this.d.log.error(line); else if (m.level === 'warning') this.d.log.warn(line); else this.d.log.info(line);
        return;
      }
      case 'requestTrust': return this.onTrust(m);
      case 'saveTrust': return this.onSaveTrust(m);
      default:
        this.d.log.warn(`the panel sent ${(m as { type: string }).type}, which this host does not handle yet; ignored`);
    }
  }

  private async onReady(): Promise<void> {
    try {
      const view = await this.ensureView();
      this.d.opened?.(true);
      this.post(initMessage(view, this.d.ui.imageUri(view), this.d.settings()));
      if (view.image.note) this.post({ type: 'notice', level: 'info', message: view.image.note.slice(0, 2000) });
    } catch (e) {
      const err = e as EngineRequestError;
      // A stopped engine or a closed panel says nothing about the model.
      if (err?.kind !== 'stopped' && err?.kind !== 'cancelled') this.d.opened?.(false);
      this.post({ type: 'notice', level: 'error', message: `Cannot open ${path.basename(this.d.target.image)} with ${path.basename(this.d.target.model)}: ${err?.message ?? e}`.slice(0, 2000), ...(err?.hint ? { hint: err.hint } : {}) });
      if (err?.kind === 'internal' || err?.kind === undefined) this.d.log.error(`opening the panel failed: ${err?.stack ?? e}`);
    }
  }

  private async onMaps(m: Extract<FromWebview, { type: 'requestMaps' }>): Promise<void> {
    let progress: ProgressHandle | undefined;
    try {
      const view = await this.ensureView();
      const settings = this.d.settings();
      const plan = estimatePlan(m.kind, m.estimate, settings);
      const R = view.summary.scores.numClasses;
      const req = this.d.engine.request({
        op: 'maps', viewId: view.viewId, kind: m.kind, fact: m.fact, layers: m.layers, estimate: plan,
        probeSeeds: settings.probeSeeds, budgetMiB: settings.memoryBudgetMB,
        ...(m.variant ? { variant: m.variant } : {}), ...(m.foil !== undefined ? { foil: m.foil } : {}),
      }, {
        onPartial: (r) => this.post({ type: 'mapsResult', id: m.id, maps: r.maps.map(mapData), final: false }),
        onProgress: (done, total, message) => {
          this.post({ type: 'progress', id: m.id, done, total, ...(message ? { message: `Computing: ${message}` } : {}) });
          // Exact all-class sweeps can take long on big models: a notification with Cancel.
          if (!progress && m.kind === 'mismatch' && plan !== 'probe' && total >= R && done < total) {
            progress = this.d.ui.startProgress(`Factfoil: mismatch map, exact sweep over all ${R} classes`, () => this.d.engine.cancel(req.id));
          }
          progress?.report(done, total, message);
        },
      });
      this.running.set(m.id, req.id);
      const r = await req.result.finally(() => this.running.delete(m.id));
      this.post({ type: 'mapsResult', id: m.id, maps: r.maps.map(mapData), final: true });
    } catch (e) {
      this.fail(m.id, e);
    } finally {
      progress?.end();
    }
  }

  private async onTrust(m: Extract<FromWebview, { type: 'requestTrust' }>): Promise<void> {
    try {
      const view = await this.ensureView();
      const req = this.d.engine.request({
        op: 'trust', viewId: view.viewId, layer: m.layer, fact: m.fact, tests: m.tests,
        ...(m.foil !== undefined ? { foil: m.foil } : {}), ...(m.kinds ? { kinds: m.kinds } : {}), ...(m.box ? { box: m.box } : {}),
        // A file path from the webview is never followed: the engine finds the image's own mask.
        ...(m.seed !== undefined ? { seed: m.seed } : {}),
      }, {
        // The panel shows this progress in its own row with Cancel, beside Run checks: no notification,
        // which would cover the panel. Steps are whole numbers (deletion runs report fractions).
        onProgress: (done, total, message) => {
          this.post({ type: 'trustProgress', id: m.id, done: Math.floor(done), total: Math.round(total), ...(message ? { message: message.slice(0, 2000) } : {}) });
        },
      });
      this.running.set(m.id, req.id);
      const report = await req.result.finally(() => this.running.delete(m.id));
      this.trustReports.set(m.id, report);
      for (const old of [...this.trustReports.keys()].slice(0, -4)) this.trustReports.delete(old);
      // The panel names the mask file it was scored against (found by the check command's conventions).
      const mask = report.truth?.source === 'mask' ? findMask({ file: view.image.path }) : undefined;
      this.post({ type: 'trustResult', id: m.id, report, ...(mask ? { maskName: path.basename(mask) } : {}) });
    } catch (e) {
      this.fail(m.id, e);
    }
  }

  /** Writes the engine's report and the panel's chart PNGs beside the image (or the save folder), never overwriting. */
  private async onSaveTrust(m: Extract<FromWebview, { type: 'saveTrust' }>): Promise<void> {
    try {
      const report = this.trustReports.get(m.trustId);
      if (!report) {
        this.post({ type: 'failed', id: m.id, message: 'That trust report is no longer held by the editor.', hint: 'Run the checks again (Run checks), then save.' });
        return;
      }
      const view = await this.ensureView();
      const charts = m.charts.map((c) => ({ ext: `.${c.name}.png`, png: Buffer.from(c.png, 'base64') }));
      const bad = charts.find((c) => !isPng(c.png));
      if (bad) {
        this.d.log.warn(`the panel sent a ${bad.ext} chart that is not a PNG; nothing saved`);
        this.post({ type: 'failed', id: m.id, message: `The ${bad.ext.slice(1)} chart could not be rendered as a PNG; nothing was saved.`, hint: 'Details are in the Factfoil output channel.' });
        return;
      }
      const outDir = this.d.saveFolder(view.image.path);
      const files = await writeTrustReport({
        imagePath: view.image.path, model: { path: view.summary.path, sha256: view.summary.sha256 }, labels: view.summary.classes, ...(outDir ? { outDir } : {}),
      }, report, charts);
      for (const f of files) this.savedFiles.add(f);
      const where = path.dirname(files[0]) === path.dirname(view.image.path) ? 'beside the image' : `in ${path.dirname(files[0])}`;
      const message = `Saved the trust report ${path.basename(files[0])}${charts.length ? ` and ${charts.length} chart${charts.length > 1 ? 's' : ''}` : ''} ${where}.`;
      this.post({ type: 'saveResult', id: m.id, files, message });
      this.d.ui.saved(files, message);
    } catch (e) {
      this.fail(m.id, e);
    }
  }

  private async onSave(m: Extract<FromWebview, { type: 'save' }>): Promise<void> {
    try {
      const view = await this.ensureView();
      const outDir = this.d.saveFolder(view.image.path);
      const req = this.d.engine.request({
        op: 'save', viewId: view.viewId, mapId: m.mapId, colormap: m.colormap, opacity: m.opacity, range: m.range, includeRaw: m.includeRaw,
        ...(outDir ? { outDir } : {}),
      });
      this.running.set(m.id, req.id);
      const r = await req.result.finally(() => this.running.delete(m.id));
      for (const f of r.files) this.savedFiles.add(f);
      const message = savedMessage(r.files, view.image.path);
      this.post({ type: 'saveResult', id: m.id, files: r.files, message });
      this.d.ui.saved(r.files, message);
    } catch (e) {
      this.fail(m.id, e);
    }
  }

  private async onSettings(m: Extract<FromWebview, { type: 'updateSettings' }>): Promise<void> {
    try {
      const view = await this.ensureView();
      const asked = m.settings.labelsFile;
      if (asked !== undefined && asked !== view.summary.settings.labelsFile && !this.pickedLabels.has(asked)) {
        this.d.log.warn(`the panel named a labels file it was not given (${asked}); ignored`);
        this.post({ type: 'failed', id: m.id, message: 'that labels file was not chosen in the file dialog', hint: 'choose it with the labels file button' });
        return;
      }
      const req = this.d.engine.request({ op: 'updateSettings', viewId: view.viewId, settings: m.settings });
      this.running.set(m.id, req.id);
      const v = await req.result.finally(() => this.running.delete(m.id));
      this.view = v;
      this.post({
        type: 'settingsResult', id: m.id, settings: v.summary.settings, labels: v.summary.classes, prediction: v.prediction,
        ...(v.expected !== undefined ? { expected: v.expected } : {}), image: panelImage(v, this.d.ui.imageUri(v)), origin: v.summary.origin,
      });
    } catch (e) {
      this.fail(m.id, e);
    }
  }
}
