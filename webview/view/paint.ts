/** Paints colourised maps into canvases (the only place pixels meet the DOM). */
import { colorIndexFor, colormapTable } from '../colormap';
import { colorizeGrid, colorizeOntoImage } from '../map-render';
import type { ColormapName, DisplayRange, ImageGeometry } from '../protocol';
import type { DecodedMap } from '../map-store';

/**
 * The map over an image of imageWidth × imageHeight, painted at `scale` of the image's own size
 * (1 for the main view; smaller for pin cards so many pins stay cheap).
 */
export function paintOverlay(canvas: HTMLCanvasElement, map: DecodedMap, geom: ImageGeometry, imageWidth: number,
  imageHeight: number, range: DisplayRange, colormap: ColormapName, scale = 1): void {
  const w = Math.max(1, Math.round(imageWidth * scale));
  const hgt = Math.max(1, Math.round(imageHeight * scale));
  const g: ImageGeometry = { ...geom, scaleX: geom.scaleX * (w / imageWidth), scaleY: geom.scaleY * (hgt / imageHeight),
    offsetX: geom.offsetX * (w / imageWidth), offsetY: geom.offsetY * (hgt / imageHeight) };
  canvas.width = w;
  canvas.height = hgt;
  const px = colorizeOntoImage({ data: map.values, width: map.data.width, height: map.data.height }, g, w, hgt, colorIndexFor(range, colormap), colormapTable(colormap));
  canvas.getContext('2d')!.putImageData(new ImageData(px, w, hgt), 0, 0);
}

/** The raw layer-resolution map at its own grid size; CSS scales it up (smoothly) for thumbnails. */
export function paintRaw(canvas: HTMLCanvasElement, map: DecodedMap, range: DisplayRange, colormap: ColormapName): void {
  const { rawWidth: w, rawHeight: hgt } = map.data;
  canvas.width = w;
  canvas.height = hgt;
  const px = colorizeGrid({ data: map.raw, width: w, height: hgt }, colorIndexFor(range, colormap), colormapTable(colormap));
  canvas.getContext('2d')!.putImageData(new ImageData(px, w, hgt), 0, 0);
}
