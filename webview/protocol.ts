/**
 * The message protocol between the Factfoil panel (webview) and the extension host.
 * One module, imported by both sides, so a renamed field is a compile error on both.
 * It imports nothing from vscode, Node or onnxruntime: only plain types and pure checks.
 *
 * Flow: the webview posts `ready`; the host answers `init`. Every webview request carries an
 * `id` (a positive integer unique per panel) and is answered by messages with the same id:
 * zero or more `progress`, then either the matching result (`mapsResult`, `saveResult`,
 * `settingsResult`, `labelsFileResult`) or `failed`. `mapsResult` may come more than once for one
 * id (a fast probe estimate first, `final: false`, then the exact maps, `final: true`).
 * `cancel`, `reveal` and `log` are notifications: no id of their own, no answer.
 */
import {
  Check, MessageShapeError, arr, bool, int, literal, nullable, num, obj, opt, partialRecord, refine, str, tagged, tuple3,
} from './protocol-checks';
import {
  TRUST_MAP_KINDS, TRUST_REPORT_FORMAT, TRUST_TESTS,
  type Curve, type DriftFigures, type RandomBaseline, type RandomFigures, type FaithfulnessFigures, type FaithfulnessReport, type RobustnessReport, type RobustnessStep,
  type SanityReport, type SanityStep, type TruthFigures, type TruthReport, type TrustMapKind, type TrustReport, type TrustTest,
} from '../core/trust/report';

// The trust-check report is defined once in core (pure types, no imports) and shared here.
export { TRUST_MAP_KINDS, TRUST_TESTS };
export type { TrustMapKind, TrustReport, TrustTest };

export const PROTOCOL_VERSION = 1;

// ---- shared vocabulary (DESIGN §2, §4) -------------------------------------------------------

export const MAP_KINDS = ['evidence', 'contrast', 'mismatch', 'expectancy', 'detail', 'guided-evidence'] as const;
export type MapKind = (typeof MAP_KINDS)[number];
export const CONTRAST_VARIANTS = ['margin', 'loss'] as const;
export const MISMATCH_VARIANTS = ['weighted', 'gradient'] as const;
export type MapVariant = (typeof CONTRAST_VARIANTS)[number] | (typeof MISMATCH_VARIANTS)[number];
export const COLORMAPS = ['viridis', 'inferno', 'diverging'] as const;
export type ColormapName = (typeof COLORMAPS)[number];
export const RESIZE_MODES = ['stretch', 'crop', 'letterbox'] as const;
export type ResizeMode = (typeof RESIZE_MODES)[number];

/** Which variants a kind has; the first is the default. Kinds not listed have none. */
export const VARIANTS_OF: Partial<Record<MapKind, readonly MapVariant[]>> = {
  contrast: CONTRAST_VARIANTS,
  mismatch: MISMATCH_VARIANTS,
};
/** Kinds whose question names a foil class. */
export const KINDS_WITH_FOIL: readonly MapKind[] = ['contrast'];

export interface Prediction { index: number; label: string; p: number }

export interface LayerInfo {
  /** ONNX tensor name. */
  id: string;
  /** Short display name, also used in saved file names. */
  short: string;
  /** Layer grid size (H, W) when known. */
  gridWidth?: number;
  gridHeight?: number;
  /** A cut point every path from input to scores passes through (DESIGN §2). */
  stage: boolean;
}

/** How model-input pixels map to image pixels: image_px = offset + model_px · scale. */
export interface ImageGeometry {
  kind: ResizeMode;
  scaleX: number;
  scaleY: number;
  offsetX: number;
  offsetY: number;
}

export interface PanelImage {
  /** A data: URI or a webview resource URI. */
  uri: string;
  /** File name for display. */
  name: string;
  width: number;
  height: number;
  geometry: ImageGeometry;
}

export interface Preprocessing {
  width: number;
  height: number;
  resize: ResizeMode;
  channels: 'RGB' | 'BGR';
  layout: 'NCHW' | 'NHWC';
  /** Multiplier applied to 0–255 pixel values before mean/std. */
  scale: number;
  mean: [number, number, number];
  std: [number, number, number];
}

export interface ModelSettings {
  preprocessing: Preprocessing;
  /** Labels file path (relative to the model or absolute); absent when labels come from the model. */
  labelsFile?: string;
}

/**
 * Where the model's preprocessing and labels came from (the engine's ModelOriginSummary):
 * preprocessing 'guessed' follows the input shape; labels 'generated' read `class 0` … `class N−1`.
 */
export interface ModelOrigin {
  preprocessing: 'sidecar' | 'guessed';
  labels: 'file' | 'sidecar' | 'beside' | 'metadata' | 'generated';
  labelsFrom?: string;
}

export interface DisplayRange { lo: number; hi: number }

export interface MapEstimate { mode: 'exact' | 'probe'; k?: number }

export interface MapData {
  mapId: string;
  kind: MapKind;
  variant?: MapVariant;
  /** Layer tensor id. */
  layer: string;
  layerShort: string;
  fact: number;
  foil?: number;
  /** Model-input resolution of the upsampled map. */
  width: number;
  height: number;
  /** base64 of little-endian float32, width·height values, row-major. */
  values: string;
  rawWidth: number;
  rawHeight: number;
  /** base64 float32 at layer resolution, rawWidth·rawHeight values. */
  raw: string;
  /** Suggested display range (p99.5 clip). */
  range: DisplayRange;
  estimate?: MapEstimate;
  /** Why a map looks the way it does, e.g. flat at a layer that reaches the scores only linearly. */
  note?: string;
}

export interface PanelDefaults {
  kind?: MapKind;
  contrastVariant?: MapVariant;
  mismatchVariant?: MapVariant;
  colormap?: ColormapName;
  opacity?: number;
  estimate?: EstimateChoice;
}

export type EstimateChoice = 'auto' | 'exact' | 'probe';

// ---- host → webview ---------------------------------------------------------------------------

export interface InitMessage {
  type: 'init';
  version: number;
  model: { name: string; scores: string };
  image: PanelImage;
  labels: string[];
  /** Ranked by p, highest first; may be a top-k subset of the labels. */
  prediction: Prediction[];
  /** Index of the label the user says is right. */
  expected?: number;
  /** Every explainable layer in graph order, shallow to deep (the depth strip keeps this order). */
  layers: LayerInfo[];
  settings: ModelSettings;
  /** Where preprocessing and labels came from, so the panel can flag a guess. */
  origin?: ModelOrigin;
  /** The model takes one grey channel (the drawer shows GRAY for Channels). */
  gray?: boolean;
  defaults?: PanelDefaults;
}
export interface MapsResultMessage { type: 'mapsResult'; id: number; maps: MapData[]; final: boolean }
export interface ProgressMessage { type: 'progress'; id: number; done: number; total: number; message?: string }
export interface SaveResultMessage { type: 'saveResult'; id: number; files: string[]; message: string }
export interface SettingsResultMessage {
  type: 'settingsResult';
  id: number;
  settings: ModelSettings;
  labels: string[];
  prediction: Prediction[];
  expected?: number;
  image: PanelImage;
  origin?: ModelOrigin;
}
export interface LabelsFileResultMessage { type: 'labelsFileResult'; id: number; path?: string }
export interface FailedMessage { type: 'failed'; id: number; message: string; hint?: string; cancelled?: boolean }
/** An unsolicited one-line message (e.g. the engine process restarted). */
export interface NoticeMessage { type: 'notice'; level: 'info' | 'warning' | 'error'; message: string; hint?: string }

/** Progress of a trust-check request (its own type, so a panel can show it apart from map progress). */
export interface TrustProgressMessage { type: 'trustProgress'; id: number; done: number; total: number; message?: string }
/** The answer to `requestTrust`: the report runTrustChecks returned. Errors and cancellation come as `failed`. */
export interface TrustResultMessage {
  type: 'trustResult'; id: number; report: TrustReport;
  /** File name of the mask the truth check scored against (when it used the image's mask file, not a box). */
  maskName?: string;
}

export type ToWebview =
  | InitMessage | MapsResultMessage | ProgressMessage | SaveResultMessage | SettingsResultMessage
  | LabelsFileResultMessage | FailedMessage | NoticeMessage | TrustProgressMessage | TrustResultMessage;

// ---- webview → host ---------------------------------------------------------------------------

export interface ReadyMessage { type: 'ready'; version: number }
export interface RequestMapsMessage {
  type: 'requestMaps';
  id: number;
  kind: MapKind;
  variant?: MapVariant;
  fact: number;
  foil?: number;
  /**
   * Layer tensor ids; the host answers all of them from one engine run. For `detail` (input
   * resolution) the host may answer one map whose layer is the input tensor.
   */
  layers: string[];
  estimate?: EstimateChoice;
}
export interface SaveMessage {
  type: 'save';
  id: number;
  mapId: string;
  colormap: ColormapName;
  opacity: number;
  range: DisplayRange;
  includeRaw: boolean;
}
export interface UpdateSettingsMessage { type: 'updateSettings'; id: number; settings: ModelSettings }
export interface PickLabelsFileMessage { type: 'pickLabelsFile'; id: number }
/** A region in original-image pixels (left, top, width, height) to score maps against. */
export interface TrustBox { x: number; y: number; width: number; height: number }
/**
 * Run the trust checks (DESIGN §4.2) on the current image at one layer. Answered by zero or more
 * `trustProgress`, then `trustResult` or `failed`; `cancel` with the same id stops it.
 */
export interface RequestTrustMessage {
  type: 'requestTrust';
  id: number;
  layer: string;
  fact: number;
  /** For contrast maps; the host picks the runner-up when absent. */
  foil?: number;
  tests: TrustTest[];
  /** Default: every kind the model supports. */
  kinds?: TrustMapKind[];
  /** Truth scoring needs one of them: a box, or a mask image file (non-zero = inside) the host reads. */
  box?: TrustBox;
  maskFile?: string;
  seed?: number;
}
/** Trust charts the panel rendered (the same figures as on screen), written with the report. */
export const TRUST_CHARTS = ['faithfulness', 'sanity', 'robustness'] as const;
export type TrustChartName = (typeof TRUST_CHARTS)[number];
export interface TrustChartPng { name: TrustChartName; png: string }
/**
 * Save the report of an answered `requestTrust` (by its id) beside the image: the host writes the
 * report JSON it received from the engine and these PNG charts, never overwriting. Answered by
 * `saveResult` or `failed`.
 */
export interface SaveTrustMessage { type: 'saveTrust'; id: number; trustId: number; charts: TrustChartPng[] }
export interface CancelMessage { type: 'cancel'; id: number }
export interface RevealMessage { type: 'reveal'; path: string }
export interface LogMessage { type: 'log'; level: 'info' | 'warning' | 'error'; message: string }

export type FromWebview =
  | ReadyMessage | RequestMapsMessage | SaveMessage | UpdateSettingsMessage | PickLabelsFileMessage
  | CancelMessage | RevealMessage | LogMessage | RequestTrustMessage | SaveTrustMessage;

/** Requests that expect an answer with the same id. */
export type WebviewRequest = RequestMapsMessage | SaveMessage | UpdateSettingsMessage | PickLabelsFileMessage | RequestTrustMessage | SaveTrustMessage;

// ---- runtime checks ---------------------------------------------------------------------------

const MAX_CLASSES = 100_000;
const MAX_SIDE = 8192;
/** Largest map we accept (values): a 4096² input. Bigger would not fit a webview message comfortably. */
const MAX_PIXELS = 4096 * 4096;
const LABEL = str(256);
const NAME = str(1024, 1);
const PATH = str(4096, 1);
const MESSAGE = str(2000);
const REQUEST_ID = int(1, Number.MAX_SAFE_INTEGER);
const CLASS_INDEX = int(0, MAX_CLASSES - 1);
const SIDE = int(1, MAX_SIDE);
const FINITE = num(-Number.MAX_VALUE, Number.MAX_VALUE);
const POSITIVE = num(Number.MIN_VALUE, Number.MAX_VALUE);
const BASE64 = /^[A-Za-z0-9+/]*={0,2}$/;
/** A chart PNG is a few hundred kB at most; 16 MB of base64 leaves room without inviting abuse. */
const MAX_CHART_PNG_BASE64 = 16 * 1024 * 1024;

/** base64 text that decodes to exactly `count` float32 values. */
function checkFloat32Base64(text: string, count: number, path: string): void {
  const expected = 4 * Math.ceil((count * 4) / 3);
  if (text.length !== expected) throw new MessageShapeError(path, `base64 length ${text.length}, expected ${expected} for ${count} float32 values`);
  if (!BASE64.test(text)) throw new MessageShapeError(path, 'not base64 text');
}

const range: Check<DisplayRange> = refine(obj<DisplayRange>({ lo: FINITE, hi: FINITE }), (r) => (r.lo <= r.hi ? undefined : `lo ${r.lo} > hi ${r.hi}`));

const variant = literal<MapVariant>(...CONTRAST_VARIANTS, ...MISMATCH_VARIANTS);
const kind = literal<MapKind>(...MAP_KINDS);

function variantFitsKind(m: { kind: MapKind; variant?: MapVariant }): string | undefined {
  if (m.variant === undefined) return undefined;
  const allowed = VARIANTS_OF[m.kind];
  return allowed?.includes(m.variant) ? undefined : `variant ${m.variant} does not belong to kind ${m.kind}`;
}

const mapData: Check<MapData> = (v, path) => {
  const m = obj<MapData>({
    mapId: str(200, 1),
    kind,
    variant: opt(variant),
    layer: NAME,
    layerShort: str(200, 1),
    fact: CLASS_INDEX,
    foil: opt(CLASS_INDEX),
    width: SIDE,
    height: SIDE,
    values: str(4 * Math.ceil((MAX_PIXELS * 4) / 3)),
    rawWidth: SIDE,
    rawHeight: SIDE,
    raw: str(4 * Math.ceil((MAX_PIXELS * 4) / 3)),
    range,
    estimate: opt(refine(obj<MapEstimate>({ mode: literal('exact', 'probe'), k: opt(int(1, MAX_CLASSES)) }),
      (e) => (e.mode === 'probe' && e.k === undefined ? 'a probe estimate needs k' : undefined))),
    note: opt(MESSAGE),
  })(v, path);
  const problem = variantFitsKind(m);
  if (problem) throw new MessageShapeError(path, problem);
  if (m.width * m.height > MAX_PIXELS) throw new MessageShapeError(path, `map ${m.width}×${m.height} is larger than ${MAX_PIXELS} pixels`);
  checkFloat32Base64(m.values, m.width * m.height, `${path}.values`);
  checkFloat32Base64(m.raw, m.rawWidth * m.rawHeight, `${path}.raw`);
  return m;
};

const geometry = obj<ImageGeometry>({
  kind: literal(...RESIZE_MODES),
  scaleX: POSITIVE,
  scaleY: POSITIVE,
  offsetX: FINITE,
  offsetY: FINITE,
});

const image = obj<PanelImage>({
  uri: refine(str(200_000_000, 1), (u) => (/^(data:image\/|https?:|vscode-(webview|resource):|blob:)/i.test(u) ? undefined : 'image uri must be a data:, blob: or webview resource URI')),
  name: NAME,
  width: SIDE,
  height: SIDE,
  geometry,
});

const prediction = obj<Prediction>({ index: CLASS_INDEX, label: LABEL, p: num(0, 1) });

const preprocessing = obj<Preprocessing>({
  width: SIDE,
  height: SIDE,
  resize: literal(...RESIZE_MODES),
  channels: literal('RGB', 'BGR'),
  layout: literal('NCHW', 'NHWC'),
  scale: FINITE,
  mean: tuple3(FINITE),
  std: tuple3(POSITIVE),
});
const settings = obj<ModelSettings>({ preprocessing, labelsFile: opt(PATH) });
const origin = obj<ModelOrigin>({
  preprocessing: literal('sidecar', 'guessed'), labels: literal('file', 'sidecar', 'beside', 'metadata', 'generated'), labelsFrom: opt(PATH),
});

const layer = obj<LayerInfo>({ id: NAME, short: str(200, 1), gridWidth: opt(SIDE), gridHeight: opt(SIDE), stage: bool() });
const estimateChoice = literal<EstimateChoice>('auto', 'exact', 'probe');
const level = literal('info', 'warning', 'error');

function indicesWithin(labels: string[], pred: Prediction[], expected: number | undefined): string | undefined {
  const bad = pred.find((p) => p.index >= labels.length);
  if (bad) return `prediction index ${bad.index} outside the ${labels.length} labels`;
  if (expected !== undefined && expected >= labels.length) return `expected ${expected} outside the ${labels.length} labels`;
  return undefined;
}

// ---- trust report checks (shape of core/trust/report.ts) ---------------------------------------

const MAX_CURVE = 100_001;
const trustKind = literal<TrustMapKind>(...TRUST_MAP_KINDS);
const trustTest = literal<TrustTest>(...TRUST_TESTS);
const UNIT = num(0, 1);
const CORRELATION = nullable(num(-1 - 1e-6, 1 + 1e-6));
const perKindFigure = partialRecord(TRUST_MAP_KINDS, CORRELATION);
const curve: Check<Curve> = refine(obj<Curve>({ x: arr(UNIT, MAX_CURVE, 1), y: arr(UNIT, MAX_CURVE, 1), auc: UNIT }),
  (c) => (c.x.length === c.y.length ? undefined : `x has ${c.x.length} points, y ${c.y.length}`));
const sanityStep = obj<SanityStep>({
  randomized: arr(NAME, 10_000), initializers: int(0, 1e9), p_fact: UNIT,
  spearman: perKindFigure, spearman_abs: perKindFigure, ssim: perKindFigure, hog: perKindFigure, flat: arr(trustKind, TRUST_MAP_KINDS.length),
});
const sanityReport = obj<SanityReport>({
  seed: int(0, 2 ** 32 - 1),
  blocks: arr(obj({ stage: NAME, initializers: int(0, 1e9) }), 10_000),
  cascade: arr(sanityStep, 10_000),
  independent: arr(sanityStep, 10_000),
});
const randomFigures = {
  deletion: curve, insertion: curve, seeds: arr(int(0, 2 ** 32 - 1), 1000, 1), deletion_auc: arr(UNIT, 1000, 1), insertion_auc: arr(UNIT, 1000, 1),
};
const faithfulnessReport = obj<FaithfulnessReport>({
  step_pixels: int(1, MAX_PIXELS),
  blur_sigma: num(0, MAX_SIDE),
  maps: partialRecord(TRUST_MAP_KINDS, obj<FaithfulnessFigures & { baseline: RandomBaseline }>({ deletion: curve, insertion: curve, baseline: literal('pixels', 'layer_grid') })),
  random: obj<FaithfulnessReport['random']>({
    pixels: obj<RandomFigures>(randomFigures),
    layer_grid: obj<RandomFigures & { grid: [number, number] }>({ ...randomFigures, grid: arr(SIDE, 2, 2) as Check<[number, number]> }),
  }),
});
const truthFigures = obj<TruthFigures>({
  nss: nullable(FINITE), cc: CORRELATION, auc_judd: nullable(UNIT), sim: nullable(UNIT), energy_in_mask: nullable(UNIT), pointing_hit: bool(),
});
const truthReport = obj<TruthReport>({
  source: literal('mask', 'box'), mask_fraction: UNIT, pointing_tolerance_px: num(0, MAX_SIDE), maps: partialRecord(TRUST_MAP_KINDS, truthFigures),
});
const driftFigures = obj<DriftFigures>({ spearman: CORRELATION, ssim: CORRELATION, pearson: CORRELATION });
const robustnessReport = obj<RobustnessReport>({
  noise_seed: int(0, 2 ** 32 - 1),
  steps: arr(obj<RobustnessStep>({
    perturbation: literal('blur', 'noise'), strength: num(0, 1e6), p_fact: UNIT, drift: partialRecord(TRUST_MAP_KINDS, driftFigures),
  }), 1000),
});
const trustReport = obj<TrustReport>({
  format: literal(TRUST_REPORT_FORMAT),
  layer: NAME,
  fact: CLASS_INDEX,
  foil: opt(CLASS_INDEX),
  p_fact: UNIT,
  kinds: arr(trustKind, TRUST_MAP_KINDS.length, 1),
  seed: int(0, 2 ** 32 - 1),
  sanity: opt(sanityReport),
  faithfulness: opt(faithfulnessReport),
  truth: opt(truthReport),
  robustness: opt(robustnessReport),
  notes: arr(MESSAGE, 100),
});
const trustBox = obj<TrustBox>({ x: FINITE, y: FINITE, width: POSITIVE, height: POSITIVE });

const toWebview: Check<ToWebview> = tagged<ToWebview>({
  init: refine(obj<InitMessage>({
    type: literal('init'),
    version: int(1, 1000),
    model: obj({ name: NAME, scores: NAME }),
    image,
    labels: arr(LABEL, MAX_CLASSES, 1),
    prediction: arr(prediction, MAX_CLASSES),
    expected: opt(CLASS_INDEX),
    layers: arr(layer, 10_000),
    settings,
    origin: opt(origin),
    gray: opt(bool()),
    defaults: opt(obj<PanelDefaults>({
      kind: opt(kind),
      contrastVariant: opt(literal(...CONTRAST_VARIANTS)),
      mismatchVariant: opt(literal(...MISMATCH_VARIANTS)),
      colormap: opt(literal(...COLORMAPS)),
      opacity: opt(num(0, 1)),
      estimate: opt(estimateChoice),
    })),
  }), (m) => indicesWithin(m.labels, m.prediction, m.expected)),
  mapsResult: obj<MapsResultMessage>({ type: literal('mapsResult'), id: REQUEST_ID, maps: arr(mapData, 10_000), final: bool() }),
  progress: refine(obj<ProgressMessage>({ type: literal('progress'), id: REQUEST_ID, done: num(0, 1e12), total: num(0, 1e12), message: opt(MESSAGE) }),
    (m) => (m.done <= m.total ? undefined : `done ${m.done} > total ${m.total}`)),
  saveResult: obj<SaveResultMessage>({ type: literal('saveResult'), id: REQUEST_ID, files: arr(PATH, 100), message: MESSAGE }),
  settingsResult: refine(obj<SettingsResultMessage>({
    type: literal('settingsResult'), id: REQUEST_ID, settings, labels: arr(LABEL, MAX_CLASSES, 1),
    prediction: arr(prediction, MAX_CLASSES), expected: opt(CLASS_INDEX), image, origin: opt(origin),
  }), (m) => indicesWithin(m.labels, m.prediction, m.expected)),
  labelsFileResult: obj<LabelsFileResultMessage>({ type: literal('labelsFileResult'), id: REQUEST_ID, path: opt(PATH) }),
  failed: obj<FailedMessage>({ type: literal('failed'), id: REQUEST_ID, message: MESSAGE, hint: opt(MESSAGE), cancelled: opt(bool()) }),
  notice: obj<NoticeMessage>({ type: literal('notice'), level, message: MESSAGE, hint: opt(MESSAGE) }),
  trustProgress: refine(obj<TrustProgressMessage>({ type: literal('trustProgress'), id: REQUEST_ID, done: num(0, 1e12), total: num(0, 1e12), message: opt(MESSAGE) }),
    (m) => (m.done <= m.total ? undefined : `done ${m.done} > total ${m.total}`)),
  trustResult: obj<TrustResultMessage>({ type: literal('trustResult'), id: REQUEST_ID, report: trustReport, maskName: opt(NAME) }),
});

const fromWebview: Check<FromWebview> = tagged<FromWebview>({
  ready: obj<ReadyMessage>({ type: literal('ready'), version: int(1, 1000) }),
  requestMaps: refine(obj<RequestMapsMessage>({
    type: literal('requestMaps'), id: REQUEST_ID, kind, variant: opt(variant), fact: CLASS_INDEX, foil: opt(CLASS_INDEX),
    layers: arr(NAME, 10_000, 1), estimate: opt(estimateChoice),
  }), (m) => variantFitsKind(m) ?? (m.kind === 'contrast' && m.foil === undefined ? 'a contrast request needs a foil' : undefined)),
  save: obj<SaveMessage>({
    type: literal('save'), id: REQUEST_ID, mapId: str(200, 1), colormap: literal(...COLORMAPS), opacity: num(0, 1), range, includeRaw: bool(),
  }),
  updateSettings: obj<UpdateSettingsMessage>({ type: literal('updateSettings'), id: REQUEST_ID, settings }),
  pickLabelsFile: obj<PickLabelsFileMessage>({ type: literal('pickLabelsFile'), id: REQUEST_ID }),
  cancel: obj<CancelMessage>({ type: literal('cancel'), id: REQUEST_ID }),
  reveal: obj<RevealMessage>({ type: literal('reveal'), path: PATH }),
  log: obj<LogMessage>({ type: literal('log'), level, message: MESSAGE }),
  requestTrust: refine(obj<RequestTrustMessage>({
    type: literal('requestTrust'), id: REQUEST_ID, layer: NAME, fact: CLASS_INDEX, foil: opt(CLASS_INDEX),
    tests: arr(trustTest, TRUST_TESTS.length, 1), kinds: opt(arr(trustKind, TRUST_MAP_KINDS.length, 1)),
    box: opt(trustBox), maskFile: opt(PATH), seed: opt(int(0, 2 ** 32 - 1)),
  }), (m) => (m.box && m.maskFile ? 'give a box or a mask file, not both' : undefined)),
  saveTrust: refine(obj<SaveTrustMessage>({
    type: literal('saveTrust'), id: REQUEST_ID, trustId: REQUEST_ID,
    charts: arr(obj<TrustChartPng>({ name: literal(...TRUST_CHARTS), png: refine(str(MAX_CHART_PNG_BASE64, 8), (t) => (BASE64.test(t) ? undefined : 'not base64 text')) }), TRUST_CHARTS.length),
  }), (m) => (new Set(m.charts.map((c) => c.name)).size === m.charts.length ? undefined : 'a chart is named twice')),
});

export type Checked<T> = { ok: true; message: T } | { ok: false; reason: string };

function run<T>(check: Check<T>, msg: unknown): Checked<T> {
  try {
    return { ok: true, message: check(msg, 'message') };
  } catch (e) {
    if (e instanceof MessageShapeError) return { ok: false, reason: e.message };
    throw e;
  }
}

/** Checks a message from the webview; the reason says which field failed, for the host's log. */
export function checkFromWebview(msg: unknown): Checked<FromWebview> { return run(fromWebview, msg); }
export function checkToWebview(msg: unknown): Checked<ToWebview> { return run(toWebview, msg); }

/** The message typed, or undefined when malformed (drop it; use checkFromWebview to log why). */
export function validateFromWebview(msg: unknown): FromWebview | undefined {
  const r = checkFromWebview(msg);
  return r.ok ? r.message : undefined;
}
export function validateToWebview(msg: unknown): ToWebview | undefined {
  const r = checkToWebview(msg);
  return r.ok ? r.message : undefined;
}
