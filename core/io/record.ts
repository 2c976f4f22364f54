/**
 * The record written beside every saved map (DESIGN §6), `"format": "factfoil-record/1"`: enough
 * to reproduce the map with the CLI. JSON keys across the product are lowerCamelCase.
 */
import { promises as fsp } from 'fs';
import { UserError } from '../errors';
import type { Geometry, PreprocessSpec } from '../image/preprocess';
import { writeFileAtomic } from './atomic';
import { fsUserError } from './fs-errors';

export const RECORD_FORMAT = 'factfoil-record/1';

export const MAP_KINDS = ['evidence', 'contrast', 'mismatch', 'expectancy', 'detail', 'guided-evidence'] as const;
export type MapKind = (typeof MAP_KINDS)[number];

export interface ClassRef {
  index: number;
  label: string;
}

export interface PredictionEntry extends ClassRef {
  /** Softmax probability of the scores. */
  p: number;
}

export interface FactfoilRecord {
  format: typeof RECORD_FORMAT;
  toolVersion: string;
  /** ISO 8601 UTC time the map was made. */
  createdAt: string;
  model: {
    path: string;
    sha256: string;
    /** The tensor the maps differentiate (DESIGN §2 "scores"). */
    scoresTensor: string;
    /** Whether that is the model output or the input of a trailing Softmax/LogSoftmax. */
    scoresFrom: 'output' | 'softmax-input';
  };
  /** What was fed: an image (preprocessed) or a tensor file given with --input. */
  input:
    | { kind: 'image'; path: string; sha256: string; width: number; height: number }
    | { kind: 'tensor'; path: string; sha256: string; shape: number[] };
  /** Preprocessing actually applied, with its geometry; null for a tensor input. */
  preprocess: { spec: PreprocessSpec; geometry: Geometry } | null;
  map: {
    kind: MapKind;
    /** contrast: 'margin' | 'loss'; mismatch: 'weighted' | 'gradient'; otherwise null. */
    variant: string | null;
    layer: { id: string; shape: number[] };
  };
  fact: ClassRef;
  foil: ClassRef | null;
  /** mismatch only: 'exact' or 'probe' with K seeds drawn from `seed`. */
  /** design: how the K probe seeds were drawn (core/methods/mismatch-seeds.ts); absent in records made before it existed. */
  estimate: { mode: 'exact' } | { mode: 'probe'; k: number; seed: number; design?: string } | null;
  normalization: {
    /** 'percentile' | 'max' | 'fixed' | 'symmetric' (DisplayRangeMode kind), or 'shared' over a group. */
    kind: string;
    p?: number;
    lo: number;
    hi: number;
    colormap: string;
    opacity?: number;
  };
  prediction: PredictionEntry[];
  /** File names (not paths) of what was written with this record. */
  files: { png?: string; raw?: string };
}

/** Writes a record as pretty JSON, never overwriting (the caller picks the name with uniquePaths). */
export async function writeRecord(file: string, record: FactfoilRecord): Promise<void> {
  validateRecord(record, file);
  await writeFileAtomic(file, encodeRecord(record), { noOverwrite: true });
}

/** The record's bytes: two-space JSON with a final newline (diffs well). */
export function encodeRecord(record: FactfoilRecord): string {
  return JSON.stringify(record, null, 2) + '\n';
}

/** Reads and validates a record; every problem names the file and the field. */
export async function readRecord(file: string): Promise<FactfoilRecord> {
  let text: string;
  try {
    text = await fsp.readFile(file, 'utf8');
  } catch (e) {
    throw fsUserError(e, 'read', file);
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (e) {
    throw new UserError(`${file} is not valid JSON: ${(e as Error).message}`, 'a record is written by factfoil explain; check the file');
  }
  return validateRecord(json, file);
}

type Check = (v: unknown) => boolean;
const isStr: Check = (v) => typeof v === 'string';
const isNum: Check = (v) => typeof v === 'number' && Number.isFinite(v);
const isInt: Check = (v) => Number.isInteger(v) && (v as number) >= 0;
const isObj = (v: unknown): v is Record<string, unknown> => typeof v === 'object' && v !== null && !Array.isArray(v);
const isIntArray: Check = (v) => Array.isArray(v) && v.every(isInt);
const isSha: Check = (v) => typeof v === 'string' && /^[0-9a-f]{64}$/.test(v);

/** Checks the shape of a record (not its meaning); returns it typed. */
export function validateRecord(json: unknown, file: string): FactfoilRecord {
  const fail = (field: string, why: string) => new UserError(`${file}: record field ${field} ${why}`, 'the record may be from another tool version or edited by hand');
  const need = (o: Record<string, unknown>, prefix: string, key: string, check: Check, what: string) => {
    if (!check(o[key])) throw fail(prefix + key, `must be ${what}`);
  };
  const obj = (o: Record<string, unknown>, prefix: string, key: string): Record<string, unknown> => {
    const v = o[key];
    if (!isObj(v)) throw fail(prefix + key, 'must be an object');
    return v;
  };
  const classRef = (v: unknown, field: string) => {
    if (!isObj(v)) throw fail(field, 'must be an object with index and label');
    need(v, `${field}.`, 'index', isInt, 'a class index');
    need(v, `${field}.`, 'label', isStr, 'a string');
  };

  if (!isObj(json)) throw fail('(top level)', 'must be a JSON object');
  const r = json;
  if (r.format !== RECORD_FORMAT) throw fail('format', `must be "${RECORD_FORMAT}"`);
  need(r, '', 'toolVersion', isStr, 'a string');
  need(r, '', 'createdAt', (v) => isStr(v) && !Number.isNaN(Date.parse(v as string)), 'an ISO date-time');

  const model = obj(r, '', 'model');
  need(model, 'model.', 'path', isStr, 'a string');
  need(model, 'model.', 'sha256', isSha, 'a SHA-256 hex string');
  need(model, 'model.', 'scoresTensor', isStr, 'a string');
  need(model, 'model.', 'scoresFrom', (v) => v === 'output' || v === 'softmax-input', '"output" or "softmax-input"');

  const input = obj(r, '', 'input');
  need(input, 'input.', 'kind', (v) => v === 'image' || v === 'tensor', '"image" or "tensor"');
  need(input, 'input.', 'path', isStr, 'a string');
  need(input, 'input.', 'sha256', isSha, 'a SHA-256 hex string');
  if (input.kind === 'image') {
    need(input, 'input.', 'width', isInt, 'a pixel count');
    need(input, 'input.', 'height', isInt, 'a pixel count');
  } else {
    need(input, 'input.', 'shape', isIntArray, 'an array of dimensions');
  }

  if (r.preprocess !== null) {
    const pre = obj(r, '', 'preprocess');
    obj(pre, 'preprocess.', 'spec');
    obj(pre, 'preprocess.', 'geometry');
  } else if (input.kind === 'image') {
    throw fail('preprocess', 'must describe the preprocessing of an image input');
  }

  const map = obj(r, '', 'map');
  need(map, 'map.', 'kind', (v) => (MAP_KINDS as readonly unknown[]).includes(v), `one of ${MAP_KINDS.join(', ')}`);
  need(map, 'map.', 'variant', (v) => v === null || isStr(v), 'a string or null');
  const layer = obj(map, 'map.', 'layer');
  need(layer, 'map.layer.', 'id', isStr, 'a tensor name');
  need(layer, 'map.layer.', 'shape', isIntArray, 'an array of dimensions');

  classRef(r.fact, 'fact');
  if (r.foil !== null) classRef(r.foil, 'foil');

  if (r.estimate !== null) {
    const est = obj(r, '', 'estimate');
    need(est, 'estimate.', 'mode', (v) => v === 'exact' || v === 'probe', '"exact" or "probe"');
    if (est.mode === 'probe') {
      need(est, 'estimate.', 'k', (v) => isInt(v) && (v as number) > 0, 'a positive whole number');
      need(est, 'estimate.', 'seed', (v) => Number.isInteger(v), 'a whole number');
      if (est.design !== undefined) need(est, 'estimate.', 'design', (v) => typeof v === 'string' && v.length > 0, 'a probe design name');
    }
  }

  const norm = obj(r, '', 'normalization');
  need(norm, 'normalization.', 'kind', isStr, 'a string');
  need(norm, 'normalization.', 'lo', isNum, 'a number');
  need(norm, 'normalization.', 'hi', isNum, 'a number');
  need(norm, 'normalization.', 'colormap', isStr, 'a string');

  if (!Array.isArray(r.prediction)) throw fail('prediction', 'must be an array');
  r.prediction.forEach((e, i) => {
    classRef(e, `prediction[${i}]`);
    need(e as Record<string, unknown>, `prediction[${i}].`, 'p', (v) => isNum(v) && (v as number) >= 0 && (v as number) <= 1, 'a probability');
  });
  const files = obj(r, '', 'files');
  for (const k of ['png', 'raw']) if (files[k] !== undefined) need(files, 'files.', k, isStr, 'a file name');
  return r as unknown as FactfoilRecord;
}
