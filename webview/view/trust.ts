/**
 * "Can I trust this map?": runs the published trust checks (DESIGN §4.2) on the panel's current
 * image, layer and fact through the host, and shows the answer as small charts, each with a
 * one-line plain explanation and the figures that matter, under the usual caution.
 */
import { clear, h } from '../dom';
import type { HostLink } from '../host-link';
import { LayerInfo, ToWebview, TRUST_TESTS, TrustReport, TrustTest } from '../protocol';
import { cascadeChart, driftCharts, EXPLAIN, faithfulnessCharts } from '../../core/trust/figures';
import { StatusLine } from './status-line';
import { chartElement } from './trust-charts';

export interface TrustQuestion { layer?: string; fact: number; foil?: number }

const TEST_WORDS: Record<TrustTest, [string, string]> = {
  sanity: ['Weight randomization', 'does the map change when the learned weights are destroyed?'],
  faithfulness: ['Deletion and insertion', 'do its top pixels carry the prediction?'],
  truth: ['Against the object', 'does it fall on the box below, or on the image\'s mask (<name>.mask.png)?'],
  robustness: ['Blur and noise', 'does it stay put under small input changes?'],
};

const f2 = (v: number | null | undefined): string => (v === null || v === undefined ? '—' : v.toFixed(2));

export class TrustView {
  readonly root: HTMLElement;
  private labels: string[] = [];
  private layers: LayerInfo[] = [];
  private runningId?: number;
  private readonly checks = new Map<TrustTest, HTMLInputElement>();
  private readonly box: HTMLInputElement[];
  private readonly target = h('p', { class: 'ff-trust-target' });
  private readonly runButton: HTMLButtonElement;
  private readonly status = new StatusLine();
  private readonly results = h('div', { class: 'ff-trust-results', attrs: { 'aria-live': 'polite' } });

  constructor(private readonly link: HostLink, private readonly question: () => TrustQuestion) {
    const checkList = h('div', { class: 'ff-trust-checks' }, TRUST_TESTS.map((t) => {
      const box = h('input', { attrs: { type: 'checkbox', id: `ff-trust-${t}`, 'data-test': t, checked: t !== 'truth' }, on: { change: () => this.refresh() } });
      this.checks.set(t, box);
      return h('label', { class: 'ff-trust-check', attrs: { for: `ff-trust-${t}` } }, [box, h('span', { class: 'ff-trust-check-name', text: TEST_WORDS[t][0] }), h('span', { class: 'ff-trust-check-what', text: TEST_WORDS[t][1] })]);
    }));
    this.box = ['x', 'y', 'width', 'height'].map((k) => h('input', {
      class: 'ff-input ff-trust-box-field', attrs: { type: 'number', min: k === 'x' || k === 'y' ? 0 : 1, step: 1, 'aria-label': `box ${k}`, placeholder: k === 'width' ? 'w' : k === 'height' ? 'h' : k, 'data-box': k },
      on: { input: () => { if (this.boxValue()) this.checks.get('truth')!.checked = true; this.refresh(); } },
    }));
    this.runButton = h('button', { class: 'ff-button', text: 'Run checks', attrs: { type: 'button', 'data-action': 'run-trust' }, on: { click: () => this.run() } });
    this.root = h('section', { class: 'ff-trust', attrs: { 'aria-labelledby': 'ff-trust-title' } }, [
      h('h2', { class: 'ff-trust-title', text: 'Can I trust this map?', attrs: { id: 'ff-trust-title' } }),
      h('p', { class: 'ff-trust-intro', text: 'A map can look plausible and still say little about the model. These published checks test it on this image.' }),
      checkList,
      h('div', { class: 'ff-trust-box' }, [h('span', { class: 'ff-picker-caption', text: 'Object box (image pixels)' }), ...this.box]),
      h('div', { class: 'ff-trust-run' }, [this.target, this.runButton]),
      this.status.root,
      this.results,
      h('p', { class: 'ff-trust-caution', text: EXPLAIN.caution }),
    ]);
    this.status.root.className = 'ff-trust-status';
    link.onMessage((m) => this.onMessage(m));
  }

  /** Updates the line saying what will be checked (call when the panel's question changes). */
  refresh(): void {
    const q = this.question();
    const layer = this.layers.find((l) => l.id === q.layer);
    const fact = this.labels[q.fact] ?? `class ${q.fact}`;
    this.target.textContent = `Checks the maps at ${layer?.short ?? q.layer ?? 'the last stage'} for ${fact}${q.foil !== undefined && this.labels[q.foil] ? ` (contrast with ${this.labels[q.foil]})` : ''}.`;
    const tests = this.chosenTests();
    // Without a box the host looks for the image's mask file and says so when there is none.
    this.runButton.disabled = this.runningId !== undefined || tests.length === 0;
    this.runButton.title = tests.length === 0 ? 'Choose at least one check' : '';
  }

  private chosenTests(): TrustTest[] {
    return TRUST_TESTS.filter((t) => this.checks.get(t)!.checked);
  }

  private boxValue(): { x: number; y: number; width: number; height: number } | undefined {
    const [x, y, w, hh] = this.box.map((b) => (b.value.trim() === '' ? NaN : Number(b.value)));
    return [x, y, w, hh].every(Number.isFinite) && w > 0 && hh > 0 ? { x, y, width: w, height: hh } : undefined;
  }

  private run(): void {
    const q = this.question();
    if (!q.layer) return;
    const tests = this.chosenTests();
    const box = tests.includes('truth') ? this.boxValue() : undefined;
    this.runningId = this.link.request({ type: 'requestTrust', layer: q.layer, fact: q.fact, ...(q.foil !== undefined && q.foil !== q.fact ? { foil: q.foil } : {}), tests, ...(box ? { box } : {}) });
    this.showProgress('Starting the checks…');
    this.refresh();
  }

  private showProgress(message: string, fraction?: number): void {
    const id = this.runningId;
    this.status.show({ kind: 'progress', message, fraction, onCancel: () => { if (id !== undefined) this.link.post({ type: 'cancel', id }); } });
  }

  private onMessage(m: ToWebview): void {
    if (m.type === 'init') { this.labels = m.labels; this.layers = m.layers; this.refresh(); return; }
    if (m.type === 'settingsResult') { this.labels = m.labels; this.refresh(); return; }
    if (!('id' in m) || m.id !== this.runningId) return;
    if (m.type === 'trustProgress') this.showProgress(m.message ?? 'Running the checks…', m.total > 0 ? m.done / m.total : undefined);
    else if (m.type === 'trustResult') { this.runningId = undefined; this.status.show({ kind: 'idle' }); this.show(m.report); this.refresh(); }
    else if (m.type === 'failed') {
      this.runningId = undefined;
      this.status.show(m.cancelled ? { kind: 'info', message: 'Checks cancelled.' } : { kind: 'error', message: m.message, hint: m.hint });
      this.refresh();
    }
  }

  /** Draws a report: one figure per check, each with its plain explanation and key figures. */
  show(r: TrustReport): void {
    clear(this.results);
    const label = (i: number | undefined) => (i === undefined ? '' : this.labels[i] ?? `class ${i}`);
    this.results.append(h('p', { class: 'ff-trust-about', text: `${label(r.fact)} at ${this.layers.find((l) => l.id === r.layer)?.short ?? r.layer}, p = ${r.p_fact.toFixed(3)}. Seed ${r.seed}.` }));
    if (r.sanity) {
      const charts = [cascadeChart(r), cascadeChart(r, 'spearman', 'independent')].filter((c) => !!c).map((c) => chartElement(c!));
      const first = r.sanity.cascade[0];
      const key = first ? r.kinds.map((k) => `${k} ${first.flat.includes(k) ? 'flat' : f2(first.spearman[k])}`).join(', ') : '';
      const explain = r.sanity.independent.length ? `${EXPLAIN.cascade} ${EXPLAIN.independent}` : EXPLAIN.cascade;
      if (charts.length) this.results.append(figure('sanity', 'Weight randomization', charts, explain, first ? `After randomizing ${first.randomized[0]}: Spearman ${key}.` : ''));
    }
    if (r.faithfulness) {
      const f = r.faithfulness;
      const key = r.kinds.filter((k) => f.maps[k]).map((k) => {
        const m = f.maps[k]!;
        const b = f.random[m.baseline];
        return `${k} ${f2(m.deletion.auc)} / ${f2(m.insertion.auc)} (random ${f2(b.deletion.auc)} / ${f2(b.insertion.auc)})`;
      }).join('; ');
      this.results.append(figure('faithfulness', 'Deletion and insertion', faithfulnessCharts(r).map(chartElement), `${EXPLAIN.deletion} ${EXPLAIN.insertion}`, `Areas, deletion / insertion: ${key}.`));
    }
    if (r.truth) this.results.append(figure('truth', 'Against the object', [truthTable(r)], EXPLAIN.truth, `The ${r.truth.source} covers ${(100 * r.truth.mask_fraction).toFixed(1)}% of the image; a map spread evenly would put that share of its energy inside.`));
    if (r.robustness) this.results.append(figure('robustness', 'Blur and noise', driftCharts(r).map(chartElement), `${EXPLAIN.blur} ${EXPLAIN.noise}`, ''));
    for (const n of r.notes) this.results.append(h('p', { class: 'ff-note', text: n, attrs: { role: 'note' } }));
  }
}

function figure(test: TrustTest, title: string, body: Element[], explain: string, figures: string): HTMLElement {
  return h('figure', { class: 'ff-trust-figure', attrs: { 'data-test': test } }, [
    h('h3', { class: 'ff-trust-figure-title', text: title }),
    h('div', { class: 'ff-trust-charts' }, body),
    h('figcaption', { class: 'ff-trust-explain', text: explain }),
    figures ? h('p', { class: 'ff-trust-figures', text: figures }) : '',
  ]);
}

function truthTable(r: TrustReport): HTMLElement {
  const cols: [string, (k: (typeof r.kinds)[number]) => string][] = [
    ['NSS', (k) => f2(r.truth!.maps[k]?.nss)], ['CC', (k) => f2(r.truth!.maps[k]?.cc)], ['AUC-Judd', (k) => f2(r.truth!.maps[k]?.auc_judd)],
    ['SIM', (k) => f2(r.truth!.maps[k]?.sim)], ['energy inside', (k) => f2(r.truth!.maps[k]?.energy_in_mask)],
    ['peak on it', (k) => (r.truth!.maps[k] ? (r.truth!.maps[k]!.pointing_hit ? 'yes' : 'no') : '—')],
  ];
  return h('table', { class: 'ff-trust-table' }, [
    h('thead', {}, [h('tr', {}, [h('th', { text: 'map', attrs: { scope: 'col' } }), ...cols.map(([c]) => h('th', { text: c, attrs: { scope: 'col' } }))])]),
    h('tbody', {}, r.kinds.filter((k) => r.truth!.maps[k]).map((k) => h('tr', {}, [h('th', { text: k, attrs: { scope: 'row' } }), ...cols.map(([, v]) => h('td', { text: v(k) }))]))),
  ]);
}
