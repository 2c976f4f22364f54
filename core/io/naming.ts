/**
 * Output file names (DESIGN §6): `<stem>.<map>.<layer-short>.<fact>[-vs-<foil>]` plus an
 * extension, next to the image, never overwriting. Labels and tensor names come from models and
 * users, so every part is sanitized: no path separators, no dots (the part separator, and no
 * `..`), no control or shell-hostile characters, no Windows reserved names, bounded length.
 */
import { existsSync, promises as fsp } from 'fs';
import * as path from 'path';
import { UserError } from '../errors';
import { sha256Bytes } from './hash';
import { TargetExistsError, writeFileAtomic } from './atomic';

/** UTF-8 byte budgets. 60 + 1 + 24 + 1 + 40 + 1 + 40 + 4 + 40 = 211, plus "-9999" and ".json" stays under the common 255-byte limit. */
export const NAME_PART_MAX_BYTES = 40;
const IMAGE_STEM_MAX_BYTES = 60;
const MAP_KIND_MAX_BYTES = 24;

/** Windows device names, reserved in any folder and with any extension. */
const RESERVED = /^(con|prn|aux|nul|com[0-9]|lpt[0-9])$/i;

/**
 * Makes one name part safe and readable, deterministically: Unicode letters and digits, '_' and
 * '-' are kept; whitespace becomes '_'; any other run of characters becomes '_'; leading and
 * trailing '_'/'-' are dropped (a leading '-' reads as a command-line option). When the text had
 * to be shortened, a '~' and 8 hex digits of its SHA-256 are appended, so long labels that share
 * a prefix still get distinct names. Empty results become 'unnamed'.
 */
export function sanitizeNamePart(text: string, maxBytes = NAME_PART_MAX_BYTES): string {
  let s = text
    .normalize('NFC')
    .replace(/[^\p{L}\p{N}\p{M}_-]+/gu, '_')
    .replace(/_+/g, '_')
    .replace(/^[-_]+|[-_]+$/g, '');
  if (s === '') s = 'unnamed';
  if (RESERVED.test(s)) s = `${s}_`;
  if (Buffer.byteLength(s, 'utf8') > maxBytes) {
    const tag = `~${sha256Bytes(text).slice(0, 8)}`;
    s = truncateUtf8(s, maxBytes - tag.length).replace(/[-_]+$/, '') + tag;
  }
  return s;
}

/** Cuts a string to at most `maxBytes` UTF-8 bytes without splitting a character. */
function truncateUtf8(s: string, maxBytes: number): string {
  let out = '';
  let bytes = 0;
  for (const ch of s) {
    const n = Buffer.byteLength(ch, 'utf8');
    if (bytes + n > maxBytes) break;
    out += ch;
    bytes += n;
  }
  return out;
}

export interface MapFileStemParts {
  imagePath: string;
  /** Map kind, e.g. 'evidence', 'contrast'. */
  map: string;
  /** From layerShortName. */
  layerShort: string;
  /** Fact label (or 'class 3' style fallback). */
  fact: string;
  foil?: string;
}

/** `<image-stem>.<map>.<layer-short>.<fact>[-vs-<foil>]`, every part sanitized. */
export function mapFileStem(p: MapFileStemParts): string {
  const imageStem = path.basename(p.imagePath, path.extname(p.imagePath));
  const parts = [
    sanitizeNamePart(imageStem, IMAGE_STEM_MAX_BYTES),
    sanitizeNamePart(p.map, MAP_KIND_MAX_BYTES),
    sanitizeNamePart(p.layerShort),
    sanitizeNamePart(p.fact) + (p.foil !== undefined ? `-vs-${sanitizeNamePart(p.foil)}` : ''),
  ];
  return parts.join('.');
}

/**
 * A readable short name for an ONNX tensor. Exporters write names like
 * `/layer2/layer2.1/relu_1/Relu_output_0` or `model/conv2d_3/Relu:0`; we split on '/', drop the
 * exporter's `_output_N` / `:N` suffixes, drop a path segment that the next one repeats as its
 * prefix (`layer2` before `layer2.1`), drop a last segment that only repeats the op type of the
 * one before (`relu_1/Relu`), keep the last two segments, and sanitize. The record keeps the full id.
 */
export function layerShortName(tensorName: string): string {
  let segs = tensorName
    .split('/')
    .map((s) => s.replace(/_output_\d+$/, '').replace(/:\d+$/, ''))
    .filter((s) => s !== '');
  segs = segs.filter((s, i) => i === segs.length - 1 || !segs[i + 1].startsWith(s));
  if (segs.length >= 2) {
    const last = segs[segs.length - 1].toLowerCase();
    const prev = segs[segs.length - 2].toLowerCase();
    if (prev.startsWith(last)) segs = segs.slice(0, -1);
  }
  return sanitizeNamePart(segs.slice(-2).join('-') || tensorName);
}

export interface UniquePaths {
  /** The stem actually used: the given one, or with '-2', '-3', … appended. */
  stem: string;
  /** One path per extension, in the order given. */
  paths: string[];
}

const MAX_SUFFIX = 9999;

/**
 * Paths `<dir>/<stem><ext>` for every extension such that none exists yet; when any does, '-2',
 * '-3', … is appended to the stem for all of them, so a PNG and its record always share a stem.
 * This only checks; writeUniqueFiles also claims the names atomically.
 */
export function uniquePaths(dir: string, stem: string, exts: readonly string[]): UniquePaths {
  for (let n = 1; n <= MAX_SUFFIX; n++) {
    const candidate = n === 1 ? stem : `${stem}-${n}`;
    const paths = exts.map((ext) => path.join(dir, candidate + ext));
    if (!paths.some((p) => existsSync(p))) return { stem: candidate, paths };
  }
  throw new UserError(`no free file name for ${path.join(dir, stem)} (tried -2 … -${MAX_SUFFIX})`, 'clean up the output folder');
}

/**
 * Writes a set of files sharing one fresh stem (e.g. a map PNG and its record), never
 * overwriting: names are chosen with uniquePaths and each file is written with an atomic
 * create-if-absent, so a concurrent writer that takes a name first makes us move on to the next
 * suffix (removing what we had already written under that stem). `contents` receives the chosen
 * paths, so a record can name its PNG.
 */
export async function writeUniqueFiles(
  dir: string,
  stem: string,
  exts: readonly string[],
  contents: (chosen: UniquePaths) => (Uint8Array | string)[] | Promise<(Uint8Array | string)[]>,
): Promise<UniquePaths> {
  // Stems are built from sanitized parts; this guard keeps any other caller inside `dir` too.
  const home = path.resolve(dir);
  const escapes = exts.find((ext) => path.dirname(path.resolve(home, stem + ext)) !== home);
  if (escapes !== undefined) throw new UserError(`will not write ${stem}${escapes}: the name leads out of ${home}`, 'use a plain file name');
  for (let attempt = 0; attempt < 20; attempt++) {
    const chosen = uniquePaths(dir, stem, exts);
    const data = await contents(chosen);
    if (data.length !== exts.length) throw new Error('writeUniqueFiles: one content per extension expected');
    const written: string[] = [];
    try {
      for (let i = 0; i < exts.length; i++) {
        await writeFileAtomic(chosen.paths[i], data[i], { noOverwrite: true });
        written.push(chosen.paths[i]);
      }
      return chosen;
    } catch (e) {
      await Promise.all(written.map((p) => fsp.unlink(p).catch(() => undefined)));
      if (!(e instanceof TargetExistsError)) throw e;
    }
  }
  throw new UserError(`could not claim a free file name for ${path.join(dir, stem)}: other writers keep taking them`, 'try again');
}
