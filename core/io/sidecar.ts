/**
 * The model settings sidecar, `<model-stem>.factfoil.json` next to the model (DESIGN §6):
 *   { "format": "factfoil-model/1", "labels": "labels.txt" | ["a", "b", …], "preprocess": {…} }
 * `labels` is a path relative to the sidecar's folder, or the labels themselves. `preprocess` may
 * give any subset of the PreprocessSpec fields plus "preset" (a PREPROCESS_PRESETS name); what
 * it leaves out comes from the model's input shape (resolvePreprocessSpec). A malformed sidecar
 * is an error naming the file and field, never silently replaced.
 */
import { promises as fsp } from 'fs';
import * as path from 'path';
import { UserError } from '../errors';
import {
  PREPROCESS_PRESETS,
  PRESET_NAMES,
  specFromInputShape,
  validatePreprocessSpec,
  type PreprocessSpec,
  type PresetName,
} from '../image/preprocess';
import { writeFileAtomicReplace } from './atomic';
import { errnoCode, fsUserError } from './fs-errors';

export const SIDECAR_FORMAT = 'factfoil-model/1';
export const SIDECAR_SUFFIX = '.factfoil.json';

export type SidecarPreprocess = Partial<PreprocessSpec> & { preset?: PresetName };

export interface Sidecar {
  format: typeof SIDECAR_FORMAT;
  labels?: string | string[];
  preprocess?: SidecarPreprocess;
}

/** `<dir>/<model-stem>.factfoil.json`, the stem being the file name without its last extension. */
export function sidecarPath(modelPath: string): string {
  const stem = path.basename(modelPath, path.extname(modelPath));
  return path.join(path.dirname(modelPath), stem + SIDECAR_SUFFIX);
}

/** Reads and validates the sidecar; undefined when there is none. */
export async function readSidecar(modelPath: string): Promise<Sidecar | undefined> {
  const file = sidecarPath(modelPath);
  let text: string;
  try {
    text = await fsp.readFile(file, 'utf8');
  } catch (e) {
    if (errnoCode(e) === 'ENOENT') return undefined;
    throw fsUserError(e, 'read', file);
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (e) {
    throw new UserError(`${file} is not valid JSON: ${(e as Error).message}`, 'fix or delete the model settings file');
  }
  return validateSidecar(json, file);
}

/** Checks a parsed sidecar; `file` names it in errors. */
export function validateSidecar(json: unknown, file: string): Sidecar {
  const fail = (field: string, why: string) => new UserError(`${file}: ${field} ${why}`, 'fix or delete the model settings file');
  if (typeof json !== 'object' || json === null || Array.isArray(json)) throw fail('the content', 'must be a JSON object');
  const o = json as Record<string, unknown>;
  if (o.format !== SIDECAR_FORMAT) throw fail('"format"', `must be "${SIDECAR_FORMAT}"`);
  for (const key of Object.keys(o)) {
    if (!['format', 'labels', 'preprocess'].includes(key)) throw fail(`"${key}"`, 'is not a known field (format, labels, preprocess)');
  }
  const out: Sidecar = { format: SIDECAR_FORMAT };
  if (o.labels !== undefined) {
    if (typeof o.labels === 'string') {
      if (o.labels.trim() === '') throw fail('"labels"', 'must not be empty');
      out.labels = o.labels;
    } else if (Array.isArray(o.labels)) {
      o.labels.forEach((l, i) => {
        if (typeof l !== 'string' || l === '') throw fail(`"labels"[${i}]`, 'must be a non-empty string');
      });
      out.labels = o.labels as string[];
    } else {
      throw fail('"labels"', 'must be a file name or an array of strings');
    }
  }
  if (o.preprocess !== undefined) out.preprocess = validateSidecarPreprocess(o.preprocess, file);
  return out;
}

const PREPROCESS_KEYS = ['preset', 'size', 'resize', 'channels', 'layout', 'scale', 'mean', 'std', 'background', 'resample'];

function validateSidecarPreprocess(value: unknown, file: string): SidecarPreprocess {
  const fail = (field: string, why: string) => new UserError(`${file}: preprocess.${field} ${why}`, 'fix or delete the model settings file');
  if (typeof value !== 'object' || value === null || Array.isArray(value)) {
    throw new UserError(`${file}: "preprocess" must be a JSON object`, 'fix or delete the model settings file');
  }
  const p = value as Record<string, unknown>;
  for (const key of Object.keys(p)) if (!PREPROCESS_KEYS.includes(key)) throw fail(key, `is not a known field (${PREPROCESS_KEYS.join(', ')})`);
  if (p.preset !== undefined && !PRESET_NAMES.includes(p.preset as PresetName)) throw fail('preset', `must be one of ${PRESET_NAMES.join(', ')}`);
  // Check each given field by validating it on top of a complete, valid spec.
  const preset = p.preset !== undefined ? PREPROCESS_PRESETS[p.preset as PresetName] : PREPROCESS_PRESETS.unit;
  const probe = { size: [224, 224], resize: 'stretch', layout: 'NCHW', ...preset, ...p } as PreprocessSpec;
  if (p.channels === 'GRAY' && p.mean === undefined) probe.mean = [0];
  if (p.channels === 'GRAY' && p.std === undefined) probe.std = [1];
  validatePreprocessSpec(probe, file);
  return p as SidecarPreprocess;
}

/**
 * The spec actually applied: the model's input shape (size, layout; specFromInputShape), then
 * the sidecar's preset, then its explicit fields. A size that contradicts a fixed model input
 * size is an error, since the model would refuse the tensor.
 */
export function resolvePreprocessSpec(inputDims: readonly (number | string | null | undefined)[], given: SidecarPreprocess | undefined, where = 'model settings', inputWhere = 'the model input'): PreprocessSpec {
  // A symbolic channel axis is taken from the settings' layout, so the settings can resolve it.
  const channelAxis = given?.layout === 'NCHW' ? 1 : given?.layout === 'NHWC' ? 3 : -1;
  const dims = channelAxis > 0 && inputDims.length === 4 && typeof inputDims[channelAxis] !== 'number'
    ? inputDims.map((d, i) => (i === channelAxis ? (given?.channels === 'GRAY' ? 1 : 3) : d))
    : inputDims;
  const base = specFromInputShape(dims, inputWhere);
  if (!given) return base;
  const { preset, ...fields } = given;
  const spec: PreprocessSpec = { ...base, ...(preset ? clonePreset(preset) : {}), ...fields };
  const fixed = (d: unknown) => (typeof d === 'number' && d > 0 ? d : undefined);
  const c = fixed(inputDims[spec.layout === 'NCHW' ? 1 : 3]);
  const nc = spec.channels === 'GRAY' ? 1 : 3;
  if (c !== undefined && c !== nc) {
    throw new UserError(`${where}: preprocess.channels ${spec.channels} gives ${nc} channel(s), the model input [${inputDims.join(', ')}] takes ${c}`, 'fix channels or layout in the settings');
  }
  validatePreprocessSpec(spec, where);
  const [hAxis, wAxis] = spec.layout === 'NCHW' ? [2, 3] : [1, 2];
  const fh = fixed(inputDims[hAxis]);
  const fw = fixed(inputDims[wAxis]);
  if ((fh !== undefined && fh !== spec.size[0]) || (fw !== undefined && fw !== spec.size[1])) {
    throw new UserError(`${where}: preprocess.size [${spec.size.join(', ')}] does not match the model input [${inputDims.join(', ')}]`, 'remove size from the settings or set it to the model input size');
  }
  return spec;
}

function clonePreset(name: PresetName) {
  const p = PREPROCESS_PRESETS[name];
  return { ...p, mean: [...p.mean], std: [...p.std] };
}

/**
 * Writes the sidecar (validated first), replacing the previous one atomically. A previous one
 * that is malformed is the user's hand-edited file: reported (readSidecar's error), not replaced.
 */
export async function writeSidecar(modelPath: string, sidecar: Sidecar): Promise<string> {
  const file = sidecarPath(modelPath);
  validateSidecar(sidecar, file);
  await readSidecar(modelPath);
  await writeFileAtomicReplace(file, JSON.stringify(sidecar, null, 2) + '\n');
  return file;
}
