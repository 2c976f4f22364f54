/**
 * Pinned maps side by side, each with its own colour bar. A scale per map by default; on request
 * one scale per map kind (the union of those pins' display ranges, so equal colours mean equal
 * values). Kinds are never mixed: a mismatch map's values are orders of magnitude below a
 * contrast map's, and a scale shared with one would paint the other flat.
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
  private readonly empty: HTMLElement;

  constructor(private readonly actions: PinActions) {
    this.list = h('ul', { class: 'ff-pins' });
    this.sharedToggle = h('input', { attrs: { id: 'ff-shared-scale', type: 'checkbox', 'aria-keyshortcuts': 'u' }, on: { change: () => actions.toggleShared(this.sharedToggle.checked) } });
    this.empty = h('p', { class: 'ff-hint ff-tray-empty', text: 'Press P to pin the current map and compare maps side by side.' });
    this.root = h('section', { class: 'ff-tray', attrs: { id: 'ff-pins', 'aria-label': 'Pinned maps' } }, [
      h('div', { class: 'ff-section-head' }, [
        h('h2', { class: 'ff-h2', text: 'Pinned' }),
        h('label', { class: 'ff-check', attrs: { title: 'Pins of the same map kind share one colour scale (U)' } }, [this.sharedToggle, ' one scale per map kind']),
      ]),
      this.empty,
      this.list,
    ]);
  }

  /** The range each pin is drawn with: its own, or the union over the pins of its kind. */
  static rangesFor(pins: readonly Pin[], shared: boolean): DisplayRange[] {
    if (!shared) return pins.map((p) => p.range);
    return pins.map((p) => sharedRange(pins.filter((q) => q.map.data.kind === p.map.data.kind).map((q) => q.range)));
  }

  update(pins: readonly Pin[], image: PanelImage, colormap: ColormapName, shared: boolean): void {
    this.sharedToggle.checked = shared;
    this.empty.hidden = pins.length > 0;
    const ranges = PinTray.rangesFor(pins, shared);
    clear(this.list);
    const scale = Math.min(1, CARD_PIXELS / image.width);
    pins.forEach((pin, i) => {
      const canvas = h('canvas', { class: 'ff-overlay', attrs: { 'aria-hidden': 'true' } });
      paintOverlay(canvas, pin.map, image.geometry, image.width, image.height, ranges[i], colormap, scale);
      const img = h('img', { class: 'ff-image', attrs: { src: image.uri, alt: '', width: image.width, height: image.height } });
      const d = pin.map.data;
      const sameKind = pins.filter((q) => q.map.data.kind === d.kind).length;
      const legend = new Legend('ff-pin-legend');
      legend.update(colormap, ranges[i], shared && sameKind > 1 ? `shared by ${sameKind} ${d.kind} pins` : 'this map\'s own scale');
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
        legend.root,
        h('div', { class: 'ff-pin-actions' }, [
          h('button', { class: 'ff-button ff-button-small', text: 'Save', attrs: { type: 'button', 'data-action': 'save' }, on: { click: () => this.actions.save(pin) } }),
          h('button', { class: 'ff-button ff-button-small ff-button-quiet', text: '×', attrs: { type: 'button', 'data-action': 'remove', 'aria-label': 'Remove pin', title: 'Remove pin' }, on: { click: () => this.actions.remove(pin) } }),
        ]),
      ]);
      this.list.append(card);
    });
  }
}
