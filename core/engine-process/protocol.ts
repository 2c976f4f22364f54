/**
 * The messages between the extension host and the engine process (DESIGN §3): typed, versioned,
 * and checked on arrival at both ends, so a mismatch between an old extension and a new engine
 * (or a corrupted message) is a clear error, not undefined behaviour.
 *
 * host → engine: `request` (an id and one operation) and `cancel` (the id to stop).
 * engine → host: `ready` once, then per request zero or more `progress` and `partial`
 * (a first, provisional answer: a probe estimate before the exact sweep), then exactly one of
 * `result` or `error`; `log` lines at any time.
 * Plain data only (no vscode, no onnxruntime), so both sides import it.
 */

import { TRUST_MAP_KINDS, TRUST_REPORT_FORMAT, TRUST_TESTS, TrustMapKind, TrustReport, TrustTest } from '../trust/report';

export const ENGINE_PROTOCOL_VERSION = 1;

// ---- shared vocabulary ------------------------------------------------------------------------

export const ENGINE_MAP_KINDS = ['evidence', 'contrast', 'mismatch', 'expectancy', 'detail', 'guided-evidence'] as const;
export type EngineMapKind = (typeof ENGINE_MAP_KINDS)[number];
export const ENGINE_VARIANTS = ['margin', 'loss', 'weighted', 'gradient'] as const;
export type EngineVariant = (typeof ENGINE_VARIANTS)[number];
export const ENGINE_COLORMAPS = ['viridis', 'inferno', 'diverging'] as const;
export type EngineColormap = (typeof ENGINE_COLORMAPS)[number];
/** exact: all-class sweep; probe: K random ±1 seeds; probe-then-exact: a probe answer first (partial), then exact. */
export const ESTIMATE_PLANS = ['exact', 'probe', 'probe-then-exact'] as const;
export type EstimatePlan = (typeof ESTIMATE_PLANS)[number];

export interface ClassScore { index: number; label: string; p: number }

export interface LayerSummary {
  /** Position in `factfoil layers` output. */
  index: number;
  id: string;
  short: string;
  /** Without the batch axis. */
  shape: number[];
  kind: 'spatial' | 'tokens';
  grid: [number, number];
  stage: boolean;
  explainable: boolean;
  /** Why not explainable: the first op on the way to the scores without a gradient rule. */
  blockedBy?: { opType: string; node: string };
}

/** What the panel's settings drawer edits; written to the model sidecar. */
export interface PanelPreprocessing {
  width: number;
  height: number;
  resize: 'stretch' | 'crop' | 'letterbox';
  channels: 'RGB' | 'BGR';
  layout: 'NCHW' | 'NHWC';
  scale: number;
  mean: [number, number, number];
  std: [number, number, number];
}
export interface PanelSettings { preprocessing: PanelPreprocessing; labelsFile?: string }

export interface ModelSummary {
  path: string;
  name: string;
  sha256: string;
  input: { name: string; dims: number[]; declared: (number | string)[] };
  scores: { tensor: string; source: 'output' | 'softmax-input'; numClasses: number };
  classes: string[];
  /** The sidecar file when there is one. */
  sidecar?: string;
  /** Grayscale models feed one channel; the panel shows three equal values for it. */
  gray: boolean;
  settings: PanelSettings;
  /** Whether preprocessing and labels were given or guessed, so every view can say which. */
  origin: ModelOriginSummary;
  layers: LayerSummary[];
}

/**
 * preprocessing 'guessed': the model's settings file has no preprocess, the spec follows the input
 * shape. labels 'generated': no labels were found, they read `class 0` … `class N−1`; else where
 * they came from ('file' given explicitly, 'sidecar', 'beside' the model, ONNX 'metadata').
 */
export interface ModelOriginSummary {
  preprocessing: 'sidecar' | 'guessed';
  labels: 'file' | 'sidecar' | 'beside' | 'metadata' | 'generated';
  /** The labels file or the metadata key they were read from. */
  labelsFrom?: string;
}

/** image_px = offset + model_px · scale (the panel's ImageGeometry). */
export interface ImageGeometrySummary { kind: 'stretch' | 'crop' | 'letterbox'; scaleX: number; scaleY: number; offsetX: number; offsetY: number }

export interface ViewInfo {
  viewId: string;
  summary: ModelSummary;
  image: {
    path: string;
    name: string;
    width: number;
    height: number;
    format: string;
    geometry: ImageGeometrySummary;
    /** base64 PNG, only for formats a browser cannot show (TIFF). */
    previewPng?: string;
    /** A choice the decoder made for the user (e.g. the first of several frames is used). */
    note?: string;
  };
  /** All classes, highest p first. */
  prediction: ClassScore[];
  expected?: number;
}

export interface EngineMap {
  mapId: string;
  kind: EngineMapKind;
  variant?: EngineVariant;
  layer: string;
  layerShort: string;
  fact: number;
  foil?: number;
  width: number;
  height: number;
  /** base64 little-endian float32, width·height values. */
  values: string;
  rawWidth: number;
  rawHeight: number;
  raw: string;
  range: { lo: number; hi: number };
  estimate?: { mode: 'exact' | 'probe'; k?: number };
  note?: string;
}

// ---- operations -------------------------------------------------------------------------------

/** Each operation: what the request carries and what its result is. */
export interface EngineOps {
  /** Load and analyse a model (and its sidecar); the custom editor's summary. */
  openModel: { req: { model: string }; res: ModelSummary };
  /** A model with one image, kept until closeView: prediction, geometry, layers. */
  openView: { req: { model: string; image: string }; res: ViewInfo };
  predict: { req: { viewId: string }; res: { prediction: ClassScore[] } };
  maps: {
    req: {
      viewId: string; kind: EngineMapKind; variant?: EngineVariant; fact: number; foil?: number; layers: string[];
      estimate: EstimatePlan; probeSeeds: number; budgetMiB: number;
    };
    res: { maps: EngineMap[] };
  };
  /** Write PNG + record (+ .npy) of a computed map; never overwrites. `outDir` absent: beside the image. */
  save: {
    req: { viewId: string; mapId: string; colormap: EngineColormap; opacity: number; range: { lo: number; hi: number }; includeRaw: boolean; outDir?: string };
    res: { files: string[] };
  };
  /** Write the model sidecar atomically (a malformed one is reported, not replaced) and reopen the view. */
  updateSettings: { req: { viewId: string; settings: PanelSettings }; res: ViewInfo };
  closeView: { req: { viewId: string }; res: Record<string, never> };
  /** The trust checks of DESIGN §4.2 on the view's image (core/trust runTrustChecks); progress on one scale. */
  trust: {
    req: {
      viewId: string; layer: string; fact: number; foil?: number; tests: TrustTest[]; kinds?: TrustMapKind[];
      /** Original-image pixels; or a mask image file (non-zero = inside). */
      box?: { x: number; y: number; width: number; height: number }; maskFile?: string; seed?: number;
    };
    res: TrustReport;
  };
  /** Test hook, honoured only when the engine was started with FACTFOIL_ENGINE_TEST_HOOKS=1. */
  crash: { req: { how: 'exit' | 'throw' }; res: Record<string, never> };
}
export type EngineOp = keyof EngineOps;
export type EngineRequestOf<O extends EngineOp> = { op: O } & EngineOps[O]['req'];
export type EngineRequest = { [O in EngineOp]: EngineRequestOf<O> }[EngineOp];
export type EngineResultOf<O extends EngineOp> = EngineOps[O]['res'];

// ---- envelopes --------------------------------------------------------------------------------

export type ToEngine =
  | { v: number; type: 'request'; id: number; request: EngineRequest }
  | { v: number; type: 'cancel'; id: number };

export type ErrorKind = 'user' | 'cancelled' | 'internal';
export type FromEngine =
  | { v: number; type: 'ready'; pid: number }
  | { v: number; type: 'result'; id: number; result: unknown }
  | { v: number; type: 'partial'; id: number; result: unknown }
  | { v: number; type: 'progress'; id: number; done: number; total: number; message?: string }
  | { v: number; type: 'error'; id: number; kind: ErrorKind; message: string; hint?: string; stack?: string }
  | { v: number; type: 'log'; level: 'info' | 'warning' | 'error'; message: string };

// ---- checks -----------------------------------------------------------------------------------

export class EngineMessageError extends Error {
  constructor(readonly path: string, what: string) {
    super(`${path}: ${what}`);
    this.name = 'EngineMessageError';
  }
}

type Obj = Record<string, unknown>;

function object(v: unknown, path: string): Obj {
  if (typeof v !== 'object' || v === null || Array.isArray(v)) throw new EngineMessageError(path, 'expected an object');
  return v as Obj;
}
function onlyFields(o: Obj, allowed: readonly string[], path: string): void {
  for (const k of Object.keys(o)) if (!allowed.includes(k)) throw new EngineMessageError(`${path}.${k}`, 'unexpected field');
}
function string(v: unknown, path: string, max = 4096, min = 1): string {
  if (typeof v !== 'string' || v.length < min || v.length > max) throw new EngineMessageError(path, `expected a string of length ${min}..${max}`);
  return v;
}
function integer(v: unknown, path: string, min: number, max: number): number {
  if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max) throw new EngineMessageError(path, `expected an integer in [${min}, ${max}]`);
  return v;
}
function finite(v: unknown, path: string, min = -Number.MAX_VALUE, max = Number.MAX_VALUE): number {
  if (typeof v !== 'number' || !Number.isFinite(v) || v < min || v > max) throw new EngineMessageError(path, `expected a finite number in [${min}, ${max}]`);
  return v;
}
function oneOf<T extends string>(v: unknown, path: string, allowed: readonly T[]): T {
  if (!allowed.includes(v as T)) throw new EngineMessageError(path, `expected one of ${allowed.join(', ')}`);
  return v as T;
}
function optional<T>(v: unknown, check: (v: unknown) => T): T | undefined {
  return v === undefined ? undefined : check(v);
}
function boolean(v: unknown, path: string): boolean {
  if (typeof v !== 'boolean') throw new EngineMessageError(path, 'expected a boolean');
  return v;
}
function triple(v: unknown, path: string, min: number): [number, number, number] {
  if (!Array.isArray(v) || v.length !== 3) throw new EngineMessageError(path, 'expected three numbers');
  return v.map((x, i) => finite(x, `${path}[${i}]`, min)) as [number, number, number];
}

const MAX_CLASS = 99_999;
const ID = (v: unknown, p: string) => string(v, p, 200);

export function checkPanelSettings(v: unknown, path: string): PanelSettings {
  const o = object(v, path);
  onlyFields(o, ['preprocessing', 'labelsFile'], path);
  const p = object(o.preprocessing, `${path}.preprocessing`);
  const pp = `${path}.preprocessing`;
  onlyFields(p, ['width', 'height', 'resize', 'channels', 'layout', 'scale', 'mean', 'std'], pp);
  const preprocessing: PanelPreprocessing = {
    width: integer(p.width, `${pp}.width`, 1, 8192),
    height: integer(p.height, `${pp}.height`, 1, 8192),
    resize: oneOf(p.resize, `${pp}.resize`, ['stretch', 'crop', 'letterbox'] as const),
    channels: oneOf(p.channels, `${pp}.channels`, ['RGB', 'BGR'] as const),
    layout: oneOf(p.layout, `${pp}.layout`, ['NCHW', 'NHWC'] as const),
    scale: finite(p.scale, `${pp}.scale`),
    mean: triple(p.mean, `${pp}.mean`, -Number.MAX_VALUE),
    std: triple(p.std, `${pp}.std`, Number.MIN_VALUE),
  };
  const labelsFile = optional(o.labelsFile, (x) => string(x, `${path}.labelsFile`));
  return labelsFile === undefined ? { preprocessing } : { preprocessing, labelsFile };
}

/** Checks one request's operation and fields; returns it typed. */
export function checkEngineRequest(v: unknown, path = 'request'): EngineRequest {
  const o = object(v, path);
  const op = oneOf(o.op, `${path}.op`, ['openModel', 'openView', 'predict', 'maps', 'save', 'updateSettings', 'closeView', 'trust', 'crash'] as const);
  const f = (k: string) => `${path}.${k}`;
  switch (op) {
    case 'openModel':
      onlyFields(o, ['op', 'model'], path);
      return { op, model: string(o.model, f('model')) };
    case 'openView':
      onlyFields(o, ['op', 'model', 'image'], path);
      return { op, model: string(o.model, f('model')), image: string(o.image, f('image')) };
    case 'predict':
    case 'closeView':
      onlyFields(o, ['op', 'viewId'], path);
      return { op, viewId: ID(o.viewId, f('viewId')) } as EngineRequest;
    case 'maps': {
      onlyFields(o, ['op', 'viewId', 'kind', 'variant', 'fact', 'foil', 'layers', 'estimate', 'probeSeeds', 'budgetMiB'], path);
      if (!Array.isArray(o.layers) || o.layers.length < 1 || o.layers.length > 10_000) throw new EngineMessageError(f('layers'), 'expected 1..10000 layer ids');
      const kind = oneOf(o.kind, f('kind'), ENGINE_MAP_KINDS);
      const foil = optional(o.foil, (x) => integer(x, f('foil'), 0, MAX_CLASS));
      if (kind === 'contrast' && foil === undefined) throw new EngineMessageError(f('foil'), 'a contrast map needs a foil');
      const r: EngineRequestOf<'maps'> = {
        op, viewId: ID(o.viewId, f('viewId')), kind,
        fact: integer(o.fact, f('fact'), 0, MAX_CLASS),
        layers: o.layers.map((l, i) => string(l, `${f('layers')}[${i}]`)),
        estimate: oneOf(o.estimate, f('estimate'), ESTIMATE_PLANS),
        probeSeeds: integer(o.probeSeeds, f('probeSeeds'), 1, 100_000),
        budgetMiB: integer(o.budgetMiB, f('budgetMiB'), 16, 1 << 20),
      };
      const variant = optional(o.variant, (x) => oneOf(x, f('variant'), ENGINE_VARIANTS));
      if (variant !== undefined) r.variant = variant;
      if (foil !== undefined) r.foil = foil;
      return r;
    }
    case 'save': {
      onlyFields(o, ['op', 'viewId', 'mapId', 'colormap', 'opacity', 'range', 'includeRaw', 'outDir'], path);
      const range = object(o.range, f('range'));
      onlyFields(range, ['lo', 'hi'], f('range'));
      const lo = finite(range.lo, f('range.lo'));
      const hi = finite(range.hi, f('range.hi'));
      if (lo > hi) throw new EngineMessageError(f('range'), `lo ${lo} > hi ${hi}`);
      const r: EngineRequestOf<'save'> = {
        op, viewId: ID(o.viewId, f('viewId')), mapId: ID(o.mapId, f('mapId')),
        colormap: oneOf(o.colormap, f('colormap'), ENGINE_COLORMAPS), opacity: finite(o.opacity, f('opacity'), 0, 1),
        range: { lo, hi }, includeRaw: boolean(o.includeRaw, f('includeRaw')),
      };
      const outDir = optional(o.outDir, (x) => string(x, f('outDir')));
      if (outDir !== undefined) r.outDir = outDir;
      return r;
    }
    case 'updateSettings':
      onlyFields(o, ['op', 'viewId', 'settings'], path);
      return { op, viewId: ID(o.viewId, f('viewId')), settings: checkPanelSettings(o.settings, f('settings')) };
    case 'trust': {
      onlyFields(o, ['op', 'viewId', 'layer', 'fact', 'foil', 'tests', 'kinds', 'box', 'maskFile', 'seed'], path);
      const list = <T extends string>(v: unknown, p: string, allowed: readonly T[]): T[] => {
        if (!Array.isArray(v) || v.length < 1 || v.length > allowed.length) throw new EngineMessageError(p, `expected 1..${allowed.length} of ${allowed.join(', ')}`);
        return v.map((x, i) => oneOf(x, `${p}[${i}]`, allowed));
      };
      const r: EngineRequestOf<'trust'> = {
        op, viewId: ID(o.viewId, f('viewId')), layer: string(o.layer, f('layer')), fact: integer(o.fact, f('fact'), 0, MAX_CLASS),
        tests: list(o.tests, f('tests'), TRUST_TESTS),
      };
      const foil = optional(o.foil, (x) => integer(x, f('foil'), 0, MAX_CLASS));
      const kinds = optional(o.kinds, (x) => list(x, f('kinds'), TRUST_MAP_KINDS));
      const seed = optional(o.seed, (x) => integer(x, f('seed'), 0, 2 ** 32 - 1));
      const maskFile = optional(o.maskFile, (x) => string(x, f('maskFile')));
      const box = optional(o.box, (x) => {
        const b = object(x, f('box'));
        onlyFields(b, ['x', 'y', 'width', 'height'], f('box'));
        return { x: finite(b.x, f('box.x')), y: finite(b.y, f('box.y')), width: finite(b.width, f('box.width'), Number.MIN_VALUE), height: finite(b.height, f('box.height'), Number.MIN_VALUE) };
      });
      if (box && maskFile) throw new EngineMessageError(path, 'give a box or a mask file, not both');
      return { ...r, ...(foil !== undefined ? { foil } : {}), ...(kinds ? { kinds } : {}), ...(seed !== undefined ? { seed } : {}), ...(maskFile ? { maskFile } : {}), ...(box ? { box } : {}) };
    }
    case 'crash':
      onlyFields(o, ['op', 'how'], path);
      return { op, how: oneOf(o.how, f('how'), ['exit', 'throw'] as const) };
  }
}

function checkVersion(o: Obj, path: string): void {
  if (o.v !== ENGINE_PROTOCOL_VERSION) {
    throw new EngineMessageError(`${path}.v`, `engine protocol ${JSON.stringify(o.v)}, expected ${ENGINE_PROTOCOL_VERSION} (the extension and its engine come from different versions; reinstall Factfoil)`);
  }
}

/** What the engine accepts from the host. */
export function checkToEngine(v: unknown): ToEngine {
  const o = object(v, 'message');
  checkVersion(o, 'message');
  const id = integer(o.id, 'message.id', 1, Number.MAX_SAFE_INTEGER);
  if (o.type === 'cancel') { onlyFields(o, ['v', 'type', 'id'], 'message'); return { v: ENGINE_PROTOCOL_VERSION, type: 'cancel', id }; }
  if (o.type !== 'request') throw new EngineMessageError('message.type', 'expected request or cancel');
  onlyFields(o, ['v', 'type', 'id', 'request'], 'message');
  return { v: ENGINE_PROTOCOL_VERSION, type: 'request', id, request: checkEngineRequest(o.request, 'message.request') };
}

/** What the host accepts from the engine: the envelope; results are checked per operation by checkEngineResult. */
export function checkFromEngine(v: unknown): FromEngine {
  const o = object(v, 'message');
  checkVersion(o, 'message');
  const type = oneOf(o.type, 'message.type', ['ready', 'result', 'partial', 'progress', 'error', 'log'] as const);
  const id = () => integer(o.id, 'message.id', 1, Number.MAX_SAFE_INTEGER);
  const v1 = ENGINE_PROTOCOL_VERSION;
  switch (type) {
    case 'ready': return { v: v1, type, pid: integer(o.pid, 'message.pid', 0, Number.MAX_SAFE_INTEGER) };
    case 'result':
    case 'partial': return { v: v1, type, id: id(), result: o.result };
    case 'progress': {
      const done = finite(o.done, 'message.done', 0);
      const total = finite(o.total, 'message.total', 0);
      if (done > total) throw new EngineMessageError('message.done', `${done} > total ${total}`);
      const message = optional(o.message, (x) => string(x, 'message.message', 2000, 0));
      return { v: v1, type, id: id(), done, total, ...(message !== undefined ? { message } : {}) };
    }
    case 'error': {
      const m: FromEngine = { v: v1, type, id: id(), kind: oneOf(o.kind, 'message.kind', ['user', 'cancelled', 'internal'] as const), message: string(o.message, 'message.message', 20_000, 0) };
      const hint = optional(o.hint, (x) => string(x, 'message.hint', 2000, 0));
      const stack = optional(o.stack, (x) => string(x, 'message.stack', 50_000, 0));
      return { ...m, ...(hint !== undefined ? { hint } : {}), ...(stack !== undefined ? { stack } : {}) };
    }
    case 'log': return { v: v1, type, level: oneOf(o.level, 'message.level', ['info', 'warning', 'error'] as const), message: string(o.message, 'message.message', 20_000, 0) };
  }
}

function checkMap(v: unknown, path: string): EngineMap {
  const o = object(v, path);
  const w = integer(o.width, `${path}.width`, 1, 8192);
  const h = integer(o.height, `${path}.height`, 1, 8192);
  const rw = integer(o.rawWidth, `${path}.rawWidth`, 1, 8192);
  const rh = integer(o.rawHeight, `${path}.rawHeight`, 1, 8192);
  const b64 = (x: unknown, p: string, n: number) => {
    const s = string(x, p, 4 * Math.ceil((n * 4) / 3), 0);
    if (s.length !== 4 * Math.ceil((n * 4) / 3)) throw new EngineMessageError(p, `base64 of ${n} float32 values expected`);
    return s;
  };
  b64(o.values, `${path}.values`, w * h);
  b64(o.raw, `${path}.raw`, rw * rh);
  ID(o.mapId, `${path}.mapId`);
  oneOf(o.kind, `${path}.kind`, ENGINE_MAP_KINDS);
  string(o.layer, `${path}.layer`);
  integer(o.fact, `${path}.fact`, 0, MAX_CLASS);
  const range = object(o.range, `${path}.range`);
  finite(range.lo, `${path}.range.lo`);
  finite(range.hi, `${path}.range.hi`);
  return o as unknown as EngineMap;
}

function checkSummary(v: unknown, path: string): ModelSummary {
  const o = object(v, path);
  string(o.path, `${path}.path`);
  if (!Array.isArray(o.classes) || o.classes.length < 1) throw new EngineMessageError(`${path}.classes`, 'expected labels');
  if (!Array.isArray(o.layers)) throw new EngineMessageError(`${path}.layers`, 'expected an array');
  object(o.scores, `${path}.scores`);
  checkPanelSettings(o.settings, `${path}.settings`);
  const origin = object(o.origin, `${path}.origin`);
  onlyFields(origin, ['preprocessing', 'labels', 'labelsFrom'], `${path}.origin`);
  oneOf(origin.preprocessing, `${path}.origin.preprocessing`, ['sidecar', 'guessed'] as const);
  oneOf(origin.labels, `${path}.origin.labels`, ['file', 'sidecar', 'beside', 'metadata', 'generated'] as const);
  optional(origin.labelsFrom, (f) => string(f, `${path}.origin.labelsFrom`));
  return o as unknown as ModelSummary;
}

function checkViewInfo(v: unknown, path: string): ViewInfo {
  const o = object(v, path);
  ID(o.viewId, `${path}.viewId`);
  checkSummary(o.summary, `${path}.summary`);
  const img = object(o.image, `${path}.image`);
  integer(img.width, `${path}.image.width`, 1, 1 << 20);
  integer(img.height, `${path}.image.height`, 1, 1 << 20);
  object(img.geometry, `${path}.image.geometry`);
  if (!Array.isArray(o.prediction)) throw new EngineMessageError(`${path}.prediction`, 'expected an array');
  return o as unknown as ViewInfo;
}

/** Checks a result (or partial result) against the operation that asked for it. */
export function checkEngineResult<O extends EngineOp>(op: O, v: unknown): EngineResultOf<O> {
  const path = `${op} result`;
  switch (op) {
    case 'openModel': return checkSummary(v, path) as EngineResultOf<O>;
    case 'openView':
    case 'updateSettings': return checkViewInfo(v, path) as EngineResultOf<O>;
    case 'maps': {
      const o = object(v, path);
      if (!Array.isArray(o.maps)) throw new EngineMessageError(`${path}.maps`, 'expected an array');
      o.maps.forEach((m, i) => checkMap(m, `${path}.maps[${i}]`));
      return o as EngineResultOf<O>;
    }
    case 'save': {
      const o = object(v, path);
      if (!Array.isArray(o.files)) throw new EngineMessageError(`${path}.files`, 'expected an array');
      o.files.forEach((x, i) => string(x, `${path}.files[${i}]`));
      return o as EngineResultOf<O>;
    }
    case 'trust': {
      const o = object(v, path);
      if (o.format !== TRUST_REPORT_FORMAT) throw new EngineMessageError(`${path}.format`, `expected ${TRUST_REPORT_FORMAT}`);
      string(o.layer, `${path}.layer`);
      return o as unknown as EngineResultOf<O>;
    }
    case 'predict': {
      const o = object(v, path);
      if (!Array.isArray(o.prediction)) throw new EngineMessageError(`${path}.prediction`, 'expected an array');
      return o as EngineResultOf<O>;
    }
    default: return object(v, path) as EngineResultOf<O>;
  }
}
