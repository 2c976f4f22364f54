/**
 * The image with the map overlaid on a canvas at the image's own pixel size, and a read-out of the
 * raw layer-resolution value under the pointer.
 */
import { h } from '../dom';
import { formatValue, rawValueAt } from '../map-render';
import type { ColormapName, DisplayRange, PanelImage } from '../protocol';
import type { DecodedMap } from '../map-store';
import { paintOverlay } from './paint';

export class MapViewer {
  readonly root: HTMLElement;
  private readonly img: HTMLImageElement;
  private readonly canvas: HTMLCanvasElement;
  private readonly readout: HTMLElement;
  private readonly placeholder: HTMLElement;
  private image?: PanelImage;
  private map?: DecodedMap;
  private painted = '';
  /** The pointer in image pixels while it is over the image, so a new map re-reads the value there. */
  private pointer?: { ix: number; iy: number };

  constructor() {
    this.img = h('img', { class: 'ff-image', attrs: { alt: '', draggable: 'false' } });
    this.canvas = h('canvas', { class: 'ff-overlay', attrs: { 'aria-hidden': 'true' } });
    this.placeholder = h('div', { class: 'ff-overlay-placeholder', text: 'Computing the map…' });
    const frame: HTMLElement = h('div', { class: 'ff-frame', on: {
      pointermove: (e) => this.onHover(e),
      pointerleave: () => { this.pointer = undefined; this.showReadout(undefined); },
    } }, [this.img, this.canvas, this.placeholder]);
    this.readout = h('div', { class: 'ff-readout', attrs: { 'aria-live': 'off' } });
    this.root = h('div', { class: 'ff-viewer' }, [frame, this.readout]);
    this.showReadout(undefined);
  }

  setImage(image: PanelImage): void {
    this.image = image;
    if (this.img.getAttribute('src') !== image.uri) this.img.src = image.uri;
    this.img.width = image.width;
    this.img.height = image.height;
    this.img.alt = `Image ${image.name}`;
    // The frame's width follows the image's aspect so a tall image still fits the view.
    (this.img.parentElement as HTMLElement).style.setProperty('--ff-aspect', String(image.width / image.height));
    this.painted = '';
  }

  /** Shows a map (or none). Repaints only when what is drawn changes; opacity is a CSS property. */
  show(map: DecodedMap | undefined, range: DisplayRange, colormap: ColormapName, opacity: number, visible: boolean, waiting: boolean, queued?: string): void {
    const changed = map !== this.map;
    this.map = map;
    // Stepping with the keyboard changes the map under a still pointer: read the new map there.
    if (changed) this.readAtPointer();
    this.canvas.style.opacity = String(visible ? opacity : 0);
    this.placeholder.hidden = !(waiting && !map);
    this.placeholder.textContent = queued ?? 'Computing the map…';
    this.placeholder.dataset.state = queued ? 'queued' : 'computing';
    this.canvas.hidden = !map;
    if (!map || !this.image) return;
    const key = `${map.data.mapId}|${range.lo}|${range.hi}|${colormap}|${this.image.uri.length}|${this.image.width}`;
    if (key === this.painted) return;
    paintOverlay(this.canvas, map, this.image.geometry, this.image.width, this.image.height, range, colormap);
    this.canvas.dataset.mapId = map.data.mapId;
    this.painted = key;
  }

  private onHover(e: PointerEvent): void {
    if (!this.image) return;
    const box = this.img.getBoundingClientRect();
    this.pointer = { ix: ((e.clientX - box.left) / box.width) * this.image.width, iy: ((e.clientY - box.top) / box.height) * this.image.height };
    this.readAtPointer();
  }

  private readAtPointer(): void {
    if (!this.map || !this.image || !this.pointer) { this.showReadout(undefined); return; }
    const d = this.map.data;
    this.showReadout(rawValueAt({ data: this.map.raw, width: d.rawWidth, height: d.rawHeight }, d.width, d.height, this.image.geometry, this.pointer.ix, this.pointer.iy));
  }

  private showReadout(r: ReturnType<typeof rawValueAt>): void {
    if (!r || !this.map) {
      this.readout.textContent = this.map ? 'Point at the image to read the raw value' : '\u00a0';
      return;
    }
    const d = this.map.data;
    this.readout.textContent = `${d.layerShort} cell (${r.cellX}, ${r.cellY}) of ${d.rawWidth}×${d.rawHeight}: ${formatValue(r.value)}`;
  }
}
