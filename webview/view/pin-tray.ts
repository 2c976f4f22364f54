/**
 * Pinned maps side by side. One shared colour scale by default (the union of the pins' display
 * ranges, so equal colours mean equal values across pins), or a scale per map.
 */
import { clear, h } from '../dom';
import { sharedRange } from '../map-render';
import type { ColormapName, DisplayRange, PanelImage } from '../protocol';
import type { DecodedMap, Selection } from '../map-store';
import { Legend } from './legend';
import { paintOverlay } from './paint';

export interface Pin {
  pinId: number;
  map: DecodedMap;
  question: string;
  /** The pin's own display range. */
  range: DisplayRange;
  selection: Selection;
}

export interface PinActions {
  remove(pin: Pin): void;
  save(pin: Pin): void;
  open(pin: Pin): void;
  toggleShared(shared: boolean): void;
}

/** Pin cards are painted at most this wide (image pixels), to keep many pins cheap. */
const CARD_PIXELS = 320;

export class PinTray {
  readonly root: HTMLElement;
  private readonly list: HTMLUListElement;
  private readonly sharedToggle: HTMLInputElement;
  private readonly legend = new Legend('ff-tray-legend');
  private readonly empty: HTMLElement;

  constructor(private readonly actions: PinActions) {
    this.list = h('ul', { class: 'ff-pins' });
    this.sharedToggle = h('input', { attrs: { type: 'checkbox', 'aria-keyshortcuts': 'u' }, on: { change: () => actions.toggleShared(this.sharedToggle.checked) } });
    this.empty = h('p', { class: 'ff-hint ff-tray-empty', text: 'Press P to pin the current map and compare maps side by side.' });
    this.root = h('section', { class: 'ff-tray', attrs: { 'aria-label': 'Pinned maps' } }, [
      h('div', { class: 'ff-section-head' }, [
        h('h2', { class: 'ff-h2', text: 'Pinned' }),
        h('label', { class: 'ff-check' }, [this.sharedToggle, ' one shared scale']),
      ]),
      this.legend.root,
      this.empty,
      this.list,
    ]);
  }

  /** The range each pin is drawn with. */
  static rangesFor(pins: readonly Pin[], shared: boolean): DisplayRange[] {
    if (!shared) return pins.map((p) => p.range);
    const r = sharedRange(pins.map((p) => p.range));
    return pins.map(() => r);
  }

  update(pins: readonly Pin[], image: PanelImage, colormap: ColormapName, shared: boolean): void {
    this.sharedToggle.checked = shared;
    this.empty.hidden = pins.length > 0;
    const ranges = PinTray.rangesFor(pins, shared);
    this.legend.root.hidden = !(shared && pins.length > 0);
    if (shared && pins.length) this.legend.update(colormap, ranges[0], `shared by ${pins.length} pinned map${pins.length > 1 ? 's' : ''}`);
    clear(this.list);
    const scale = Math.min(1, CARD_PIXELS / image.width);
    pins.forEach((pin, i) => {
      const canvas = h('canvas', { class: 'ff-overlay', attrs: { 'aria-hidden': 'true' } });
      paintOverlay(canvas, pin.map, image.geometry, image.width, image.height, ranges[i], colormap, scale);
      const img = h('img', { class: 'ff-image', attrs: { src: image.uri, alt: '', width: image.width, height: image.height } });
      const d = pin.map.data;
      const card = h('li', {
        class: 'ff-pin', attrs: { tabindex: 0, 'data-pin': pin.pinId, 'aria-label': `Pinned: ${pin.question} at ${d.layerShort}. Enter to open, Delete to remove.` },
        on: { keydown: (e) => {
          if (e.target !== card) return;
          if (e.key === 'Delete' || e.key === 'Backspace') { e.preventDefault(); this.actions.remove(pin); }
          if (e.key === 'Enter') { e.preventDefault(); this.actions.open(pin); }
        } },
      }, [
        h('button', { class: 'ff-pin-frame', attrs: { type: 'button', tabindex: -1, title: 'Show this map in the main view' }, on: { click: () => this.actions.open(pin) } },
          [h('span', { class: 'ff-frame' }, [img, canvas])]),
        h('div', { class: 'ff-pin-caption' }, [
          h('span', { class: 'ff-pin-question', text: pin.question }),
          h('span', { class: 'ff-pin-meta', text: `${d.kind}${d.variant ? ` · ${d.variant}` : ''} · ${d.layerShort}` }),
        ]),
        h('div', { class: 'ff-pin-actions' }, [
          h('button', { class: 'ff-button ff-button-small', text: 'Save', attrs: { type: 'button', 'data-action': 'save' }, on: { click: () => this.actions.save(pin) } }),
          h('button', { class: 'ff-button ff-button-small ff-button-quiet', text: '×', attrs: { type: 'button', 'data-action': 'remove', 'aria-label': 'Remove pin', title: 'Remove pin' }, on: { click: () => this.actions.remove(pin) } }),
        ]),
      ]);
      this.list.append(card);
    });
  }
}
