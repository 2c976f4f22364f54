/** A colour scale legend: the colormap as a bar with the low, middle and high values under it. */
import { colormapCssGradient } from '../colormap';
import { formatValue } from '../map-render';
import { h } from '../dom';
import type { ColormapName, DisplayRange } from '../protocol';

export class Legend {
  readonly root: HTMLElement;
  private readonly bar: HTMLElement;
  private readonly lo: HTMLElement;
  private readonly mid: HTMLElement;
  private readonly hi: HTMLElement;
  private readonly caption: HTMLElement;

  constructor(cssClass = '') {
    this.bar = h('div', { class: 'ff-legend-bar', attrs: { 'aria-hidden': 'true' } });
    this.lo = h('span', { class: 'ff-legend-lo' });
    this.mid = h('span', { class: 'ff-legend-mid' });
    this.hi = h('span', { class: 'ff-legend-hi' });
    this.caption = h('span', { class: 'ff-legend-caption' });
    this.root = h('div', { class: `ff-legend ${cssClass}`, attrs: { role: 'img' } }, [
      this.bar, h('div', { class: 'ff-legend-ticks' }, [this.lo, this.mid, this.hi]), this.caption,
    ]);
  }

  update(colormap: ColormapName, range: DisplayRange, caption: string): void {
    this.bar.style.background = colormapCssGradient(colormap);
    this.lo.textContent = formatValue(range.lo);
    this.mid.textContent = formatValue((range.lo + range.hi) / 2);
    this.hi.textContent = formatValue(range.hi);
    this.caption.textContent = caption;
    this.root.setAttribute('aria-label', `${colormap} scale from ${formatValue(range.lo)} to ${formatValue(range.hi)}, ${caption}`);
  }
}
