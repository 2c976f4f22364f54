/** Which files the extension treats as images (the formats core/image decodes). */
import * as path from 'node:path';

export const IMAGE_EXTENSIONS = ['png', 'jpg', 'jpeg', 'webp', 'tif', 'tiff', 'gif', 'avif'] as const;
const IMAGE_RE = new RegExp(`\\.(${IMAGE_EXTENSIONS.join('|')})$`, 'i');
/** Files Factfoil wrote itself (`<stem>.<kind>.<layer>.<fact>….png`) are maps, not test images. */
const SAVED_MAP_RE = /\.(evidence|contrast|mismatch|expectancy|detail|guided-evidence)\.[^.]+\.[^.]+\.png$/i;

export function isImagePath(file: string): boolean {
  return IMAGE_RE.test(file);
}

export function isSavedMap(file: string): boolean {
  return SAVED_MAP_RE.test(path.basename(file));
}
