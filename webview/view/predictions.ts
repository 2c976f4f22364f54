/** Ranked predictions with probability bars; the fact, the foil and the expected label are marked. */
import { clear, h } from '../dom';
import type { Prediction } from '../protocol';

export interface PredictionView {
  labels: readonly string[];
  prediction: readonly Prediction[];
  expected?: number;
  fact: number;
  foil?: number;
  /** What a plain click picks, for the row's tooltip. */
  clickPicks: 'fact' | 'foil';
}

const SHOWN = 10;

export class PredictionList {
  readonly root: HTMLElement;
  private readonly list: HTMLOListElement;

  /** onPick(index, asFact): plain click picks per view.clickPicks; Shift+click always the fact. */
  constructor(private readonly onPick: (index: number, asFact: boolean) => void) {
    this.list = h('ol', { class: 'ff-preds' });
    this.root = h('section', { class: 'ff-side-section', attrs: { 'aria-label': 'Predictions' } }, [
      h('h2', { class: 'ff-h2', text: 'Predictions' }), this.list,
    ]);
  }

  update(v: PredictionView): void {
    clear(this.list);
    const rows = v.prediction.slice(0, SHOWN);
    for (const extra of [v.expected, v.fact, v.foil]) {
      if (extra === undefined || rows.some((r) => r.index === extra)) continue;
      const p = v.prediction.find((r) => r.index === extra);
      rows.push(p ?? { index: extra, label: v.labels[extra] ?? String(extra), p: NaN });
    }
    const rankOf = new Map(v.prediction.map((p, i) => [p.index, i + 1]));
    for (const r of rows) {
      const marks: string[] = [];
      if (r.index === v.fact) marks.push('fact');
      if (r.index === v.foil) marks.push('foil');
      if (r.index === v.expected) marks.push('expected');
      const pct = Number.isFinite(r.p) ? `${(r.p * 100).toFixed(1)}%` : '—';
      const bar = h('span', { class: 'ff-pred-bar-fill' });
      bar.style.width = `${Number.isFinite(r.p) ? Math.max(r.p * 100, 0.5) : 0}%`;
      const label = v.labels[r.index] ?? r.label;
      const row = h('button', {
        class: `ff-pred ${marks.map((m) => `is-${m}`).join(' ')}`,
        attrs: {
          type: 'button', 'data-index': r.index,
          title: `Click: make ${label} the ${v.clickPicks}. Shift+click: make it the fact.`,
          'aria-label': `${rankOf.get(r.index) ?? '–'}. ${label} ${pct}${marks.length ? ` (${marks.join(', ')})` : ''}`,
        },
        on: { click: (e) => this.onPick(r.index, e.shiftKey || v.clickPicks === 'fact') },
      }, [
        h('span', { class: 'ff-pred-rank', text: String(rankOf.get(r.index) ?? '–') }),
        h('span', { class: 'ff-pred-label', text: label }),
        h('span', { class: 'ff-pred-marks' }, marks.map((m) => h('span', { class: `ff-mark ff-mark-${m}`, text: m }))),
        h('span', { class: 'ff-pred-p', text: pct }),
        h('span', { class: 'ff-pred-bar' }, [bar]),
      ]);
      this.list.append(h('li', {}, [row]));
    }
  }
}
