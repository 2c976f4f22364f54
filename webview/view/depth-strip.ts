/** One small map per layer, shallow to deep; click (or ↑/↓ anywhere) to step through depth. */
import { clear, h } from '../dom';
import type { ColormapName } from '../protocol';
import type { DecodedMap } from '../map-store';
import { paintRaw } from './paint';

export interface DepthItem { id: string; short: string; map?: DecodedMap; /** Not asked yet: computed after the running request. */ queued?: boolean }

export class DepthStrip {
  readonly root: HTMLElement;
  private readonly list: HTMLOListElement;
  private readonly scopeToggle: HTMLInputElement;
  private readonly scopeLabel: HTMLElement;

  constructor(private readonly onSelect: (layerId: string) => void, onScope: (all: boolean) => void) {
    this.list = h('ol', { class: 'ff-depth-list' });
    this.scopeToggle = h('input', { attrs: { type: 'checkbox' }, on: { change: () => onScope(this.scopeToggle.checked) } });
    this.scopeLabel = h('label', { class: 'ff-check' }, [this.scopeToggle, ' all layers']);
    this.root = h('section', { class: 'ff-depth', attrs: { id: 'ff-depth', 'aria-label': 'Depth' } }, [
      h('div', { class: 'ff-section-head' }, [h('h2', { class: 'ff-h2', text: 'Depth' }), h('span', { class: 'ff-hint', text: '↑ ↓ or [ ]' }), this.scopeLabel]),
      this.list,
    ]);
  }

  update(items: readonly DepthItem[], currentId: string | undefined, colormap: ColormapName, allLayers: boolean, canShowAll: boolean): void {
    this.scopeToggle.checked = allLayers;
    this.scopeLabel.hidden = !canShowAll;
    clear(this.list);
    items.forEach((it, i) => {
      const canvas = h('canvas', { class: 'ff-thumb', attrs: { 'aria-hidden': 'true' } });
      if (it.map) paintRaw(canvas, it.map, it.map.data.range, colormap);
      const grid = it.map ? `${it.map.data.rawWidth}×${it.map.data.rawHeight}` : it.queued ? 'queued' : '…';
      const current = it.id === currentId;
      const btn = h('button', {
        class: `ff-depth-item${current ? ' is-current' : ''}${it.map ? '' : it.queued ? ' is-queued' : ' is-pending'}${it.map?.data.note ? ' is-flat' : ''}`,
        attrs: { type: 'button', 'data-layer': it.id, 'aria-current': current ? 'true' : undefined, title: it.map?.data.note ?? it.id,
          'aria-label': `Layer ${i + 1} of ${items.length}: ${it.short}, ${grid}${it.map?.data.note ? ', flat' : ''}` },
        on: { click: () => this.onSelect(it.id) },
      }, [canvas, h('span', { class: 'ff-depth-name', text: it.short }), h('span', { class: 'ff-depth-grid', text: grid })]);
      this.list.append(h('li', {}, [btn]));
      if (current) this.keepInView(btn);
    });
  }

  /** Scrolls the strip itself (never the page) so the current layer is visible. */
  private keepInView(btn: HTMLElement): void {
    requestAnimationFrame(() => {
      const l = this.list, left = btn.offsetLeft - l.offsetLeft, right = left + btn.offsetWidth;
      if (left < l.scrollLeft) l.scrollLeft = left;
      else if (right > l.scrollLeft + l.clientWidth) l.scrollLeft = right - l.clientWidth;
    });
  }
}
