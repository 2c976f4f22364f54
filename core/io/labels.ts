/**
 * Class labels: where they come from, matching an image's folder to a label, and resolving the
 * user's `--fact` / `--foil` arguments.
 */
import { promises as fsp } from 'fs';
import * as path from 'path';
import { UserError } from '../errors';
import { fsUserError } from './fs-errors';
import { sidecarPath, type Sidecar } from './sidecar';

/** ONNX metadata_props keys searched for labels, in this order. */
export const LABEL_METADATA_KEYS = ['labels', 'classes', 'class_names', 'names'];

export type LabelSource = 'file' | 'sidecar' | 'beside' | 'metadata' | 'generated';

/**
 * Labels files looked for beside a model that has no sidecar labels, in this order (`{stem}` is
 * the model's file name without `.onnx`): the names exporters and training scripts commonly
 * leave next to a model (common practice, no source).
 */
export const LABEL_FILES_BESIDE_MODEL = ['{stem}.labels.txt', '{stem}.labels.json', 'labels.txt', 'labels.json', 'classes.txt', 'classes.json'];

/** The labels files beside a model, by LABEL_FILES_BESIDE_MODEL, most specific first. */
export function labelFilesBeside(modelPath: string): string[] {
  const stem = path.basename(modelPath).replace(/\.onnx$/i, '');
  return LABEL_FILES_BESIDE_MODEL.map((n) => path.join(path.dirname(modelPath), n.replace('{stem}', stem)));
}

export interface LoadLabelsOptions {
  modelPath: string;
  /** An explicit labels file (--labels); wins over everything else. */
  labelsPath?: string;
  sidecar?: Sidecar;
  /** The model's ONNX metadata_props. */
  metadataProps?: Record<string, string>;
  /** Length of the scores vector, when known; a different label count is an error. */
  numClasses?: number;
}

export interface LoadedLabels {
  labels: string[];
  source: LabelSource;
  /** The file the labels came from, or the metadata key. */
  from?: string;
}

/** The labels, as loadLabelsWithSource, without saying where they came from. */
export async function loadLabels(opts: LoadLabelsOptions): Promise<string[]> {
  return (await loadLabelsWithSource(opts)).labels;
}

/**
 * Labels in order of precedence: the explicit file; the sidecar's "labels" (a file relative to
 * the sidecar, or an array); a labels file beside the model (LABEL_FILES_BESIDE_MODEL) with one
 * label per class; the first of LABEL_METADATA_KEYS in the ONNX metadata; else
 * `class 0` … `class N−1`. Files hold one label per line or a JSON array (or a JSON object
 * mapping "0", "1", … to labels). A count that differs from numClasses is an error.
 */
export async function loadLabelsWithSource(opts: LoadLabelsOptions): Promise<LoadedLabels> {
  const { numClasses } = opts;
  const checkCount = (labels: string[], from: string): string[] => {
    if (numClasses !== undefined && labels.length !== numClasses) {
      throw new UserError(`${from} has ${labels.length} labels but the model scores ${numClasses} classes`, 'give one label per class, in score order');
    }
    return labels;
  };
  if (opts.labelsPath) {
    return { labels: checkCount(await readLabelsFile(opts.labelsPath), opts.labelsPath), source: 'file', from: opts.labelsPath };
  }
  const sc = opts.sidecar?.labels;
  if (sc !== undefined) {
    const scFile = sidecarPath(opts.modelPath);
    if (Array.isArray(sc)) return { labels: checkCount([...sc], `${scFile} ("labels")`), source: 'sidecar', from: scFile };
    const file = path.resolve(path.dirname(scFile), sc);
    return { labels: checkCount(await readLabelsFile(file, scFile), file), source: 'sidecar', from: file };
  }
  // A file beside the model counts only when it has one label per class: another model's labels
  // in the same folder must not break this one.
  for (const file of labelFilesBeside(opts.modelPath)) {
    let labels: string[];
    try { labels = await readLabelsFile(file); } catch { continue; }
    if (numClasses === undefined || labels.length === numClasses) return { labels, source: 'beside', from: file };
  }
  const props = opts.metadataProps ?? {};
  for (const key of LABEL_METADATA_KEYS) {
    const text = props[key];
    if (text === undefined || text.trim() === '') continue;
    const where = `the model's metadata "${key}"`;
    return { labels: checkCount(parseLabelsText(text, where, 'auto'), where), source: 'metadata', from: key };
  }
  if (numClasses === undefined) {
    throw new UserError(`no labels for ${opts.modelPath} and its number of classes is not fixed`, 'give a labels file with --labels');
  }
  return { labels: Array.from({ length: numClasses }, (_, i) => `class ${i}`), source: 'generated' };
}

/** Reads a labels file; `referredBy` names the sidecar that pointed to it, for the error. */
export async function readLabelsFile(file: string, referredBy?: string): Promise<string[]> {
  let text: string;
  try {
    text = await fsp.readFile(file, 'utf8');
  } catch (e) {
    const err = fsUserError(e, 'read', file);
    if (referredBy && err instanceof UserError) throw new UserError(`${err.message} (named by ${referredBy})`, err.hint);
    throw err;
  }
  return parseLabelsText(text, file, path.extname(file).toLowerCase() === '.json' ? 'json' : 'auto');
}

/**
 * Parses labels text. JSON (when the text starts with '[' or '{', or for .json files): an array
 * of strings, or an object whose keys are 0 … N−1. Otherwise one label per line (trailing blank
 * lines and '\r' ignored, surrounding spaces trimmed); a single line with commas is read as a
 * comma-separated list (metadata values often are).
 */
export function parseLabelsText(text: string, where: string, mode: 'json' | 'auto'): string[] {
  const body = text.replace(/^\uFEFF/, '');
  const trimmed = body.trim();
  if (mode === 'json' || trimmed.startsWith('[') || trimmed.startsWith('{')) return parseLabelsJson(trimmed, where);
  const lines = body.split('\n').map((l) => l.replace(/\r$/, '').trim());
  while (lines.length > 0 && lines[lines.length - 1] === '') lines.pop();
  if (lines.length === 0) throw new UserError(`${where} holds no labels`, 'write one label per line');
  if (lines.length === 1 && lines[0].includes(',')) {
    const parts = lines[0].split(',').map((s) => s.trim());
    const empty = parts.findIndex((s) => s === '');
    if (empty >= 0) throw new UserError(`${where}: label ${empty} in the comma-separated list is empty`, 'remove the extra comma');
    return parts;
  }
  const blank = lines.findIndex((l) => l === '');
  if (blank >= 0) throw new UserError(`${where}: line ${blank + 1} is empty`, 'write one label per line, with no blank lines between them');
  return lines;
}

function parseLabelsJson(text: string, where: string): string[] {
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (e) {
    throw new UserError(`${where} is not valid JSON: ${(e as Error).message}`, 'write a JSON array of strings, or one label per line');
  }
  if (Array.isArray(json)) {
    json.forEach((v, i) => {
      if (typeof v !== 'string' || v === '') throw new UserError(`${where}: entry ${i} is not a non-empty string`, 'write a JSON array of strings');
    });
    if (json.length === 0) throw new UserError(`${where} holds no labels`, 'write a JSON array of strings');
    return json as string[];
  }
  if (typeof json === 'object' && json !== null) {
    const o = json as Record<string, unknown>;
    const n = Object.keys(o).length;
    const out: string[] = [];
    for (let i = 0; i < n; i++) {
      const v = o[String(i)];
      if (typeof v !== 'string' || v === '') throw new UserError(`${where}: key "${i}" is missing or not a non-empty string`, 'map every index 0 … N−1 to a label');
      out.push(v);
    }
    if (n === 0) throw new UserError(`${where} holds no labels`, 'write a JSON array of strings');
    return out;
  }
  throw new UserError(`${where} must hold a JSON array of strings`, 'write a JSON array of strings, or one label per line');
}

/** Case-insensitive, and '_', '-' and spaces treated alike: folder names rarely keep a label's exact spelling. */
function looseKey(s: string): string {
  return s.normalize('NFC').toLowerCase().replace(/[\s_-]+/g, '-');
}

/**
 * The label index named by the image's parent folder (the one-folder-per-class layout), or
 * undefined. An exact case-insensitive match wins; otherwise a unique match ignoring the
 * difference between '_', '-' and spaces.
 */
export function expectedLabelFromPath(imagePath: string, labels: readonly string[]): number | undefined {
  const folder = path.basename(path.dirname(path.resolve(imagePath)));
  if (!folder) return undefined;
  const lower = folder.toLowerCase();
  const exact = labels.map((l, i) => [l, i] as const).filter(([l]) => l.toLowerCase() === lower);
  if (exact.length === 1) return exact[0][1];
  if (exact.length > 1) return undefined;
  const key = looseKey(folder);
  const loose = labels.map((l, i) => [l, i] as const).filter(([l]) => looseKey(l) === key);
  return loose.length === 1 ? loose[0][1] : undefined;
}

/**
 * A class argument (--fact, --foil, --target) → index: an exact label, else a unique
 * case-insensitive label, else a 0-based index. Unknown → UserError naming close labels.
 */
export function resolveClass(arg: string, labels: readonly string[], what = 'class'): number {
  const text = arg.trim();
  const exact = labels.indexOf(text);
  if (exact >= 0) return exact;
  const ci = labels.map((l, i) => [l, i] as const).filter(([l]) => l.toLowerCase() === text.toLowerCase());
  if (ci.length === 1) return ci[0][1];
  if (/^\d+$/.test(text)) {
    const i = Number(text);
    if (i < labels.length) return i;
    throw new UserError(`${what} index ${i} is out of range: the model has ${labels.length} classes (0 … ${labels.length - 1})`, 'give a label or an index in range');
  }
  const close = closestLabels(text, labels, 3);
  throw new UserError(
    `unknown ${what} "${arg}"`,
    close.length > 0 ? `did you mean ${close.map((l) => `"${l}"`).join(', ')}? (or give a 0-based index)` : 'give a label or a 0-based index',
  );
}

/**
 * The labels nearest to `text`, case-insensitive: labels containing it first, then by Levenshtein
 * distance, keeping those within a distance of half the text length (at least 3).
 */
export function closestLabels(text: string, labels: readonly string[], n: number): string[] {
  const t = text.toLowerCase();
  const limit = Math.max(3, Math.ceil(t.length / 2));
  return labels
    .map((l, i) => ({ l, i, d: levenshtein(t, l.toLowerCase()), sub: t !== '' && l.toLowerCase().includes(t) ? 0 : 1 }))
    .filter((x) => x.d <= limit || x.sub === 0)
    .sort((a, b) => a.sub - b.sub || a.d - b.d || a.i - b.i)
    .slice(0, n)
    .map((x) => x.l);
}

/** Edit distance (insertions, deletions, substitutions), the usual dynamic programme. */
export function levenshtein(a: string, b: string): number {
  const prev = new Array<number>(b.length + 1);
  for (let j = 0; j <= b.length; j++) prev[j] = j;
  for (let i = 1; i <= a.length; i++) {
    let diag = prev[0];
    prev[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const tmp = prev[j];
      prev[j] = Math.min(prev[j] + 1, prev[j - 1] + 1, diag + (a[i - 1] === b[j - 1] ? 0 : 1));
      diag = tmp;
    }
  }
  return prev[b.length];
}
