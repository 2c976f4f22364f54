/** Where an image's object mask lives, by the conventions `factfoil check` and the panel share. */
import { existsSync } from 'node:fs';
import * as path from 'node:path';

/** An image and, when it came from a folder argument, that folder. */
export interface ImageItem { file: string; root?: string }

/**
 * The mask of an image by convention: `<masks>/<path below the folder argument>` with --masks;
 * else `<stem>.mask.png` beside the image; else, for any folder F above the image, the same
 * relative path under a sibling folder `F-masks` (the demo's `eval/` and `eval-masks/` layout).
 */
export function findMask(item: ImageItem, masksDir?: string): string | undefined {
  const file = path.resolve(item.file);
  if (masksDir) {
    const rel = item.root ? path.relative(path.resolve(item.root), file) : path.basename(file);
    for (const c of [path.join(masksDir, rel), path.join(masksDir, path.basename(file))]) if (existsSync(c)) return c;
    return undefined;
  }
  const beside = path.join(path.dirname(file), `${path.basename(file, path.extname(file))}.mask.png`);
  if (existsSync(beside)) return beside;
  for (let dir = path.dirname(file); path.dirname(dir) !== dir; dir = path.dirname(dir)) {
    const candidate = path.join(`${dir}-masks`, path.relative(dir, file));
    if (existsSync(candidate)) return candidate;
  }
  return undefined;
}
