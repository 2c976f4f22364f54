/**
 * "Can I trust this map?": runs the published trust checks (DESIGN §4.2) on the panel's current
 * image, layer and fact through the host, and shows the answer as small charts, each with a
 * one-line plain explanation and the figures that matter, under the usual caution.
 */
import { clear, h } from '../dom';
import type { HostLink } from '../host-link';
import { LayerInfo, ToWebview, TRUST_TESTS, TrustChartPng, TrustReport, TrustTest } from '../protocol';
import { cascadeChart, driftCharts, EXPLAIN, faithfulnessCharts, savedChartSets } from '../../core/trust/figures';
import { CheckVerdict, faithfulnessVerdict, robustnessVerdict, sanityVerdict, truthVerdict, VERDICT_WORDS } from '../trust-verdict';
import { StatusLine } from './status-line';
import { chartElement } from './trust-charts';
import { chartsPngBase64 } from './trust-png';

export interface TrustQuestion { layer?: string; fact: number; foil?: number }

const TEST_WORDS: Record<TrustTest, [string, string]> = {
  sanity: ['Weight randomization', 'does the map change when the learned weights are destroyed?'],
  faithfulness: ['Deletion and insertion', 'do its top pixels carry the prediction?'],
  truth: ['Against the object', 'does it fall on the box below, or on the image\'s mask file (<image name>.mask.png beside it)?'],
  robustness: ['Blur and noise', 'does it stay put under small input changes?'],
};

const f2 = (v: number | null | undefined): string => (v === null || v === undefined ? '—' : v.toFixed(2));

export class TrustView {
  readonly root: HTMLElement;
  private labels: string[] = [];
  private layers: LayerInfo[] = [];
  private runningId?: number;
  /** The panel has a model and image open (false before init and after a failed open). */
  private opened = false;
  /** The open failed before any init: the section says so and stays off. */
  private failedOpen = false;
  /** The report on screen and the request id the host keeps it under (for Save). */
  private shown?: { id: number; report: TrustReport };
  private saveId?: number;
  private readonly saveButton: HTMLButtonElement;
  private readonly checks = new Map<TrustTest, HTMLInputElement>();
  private readonly box: HTMLInputElement[];
  private readonly target = h('p', { class: 'ff-trust-target' });
  private readonly runButton: HTMLButtonElement;
  private readonly status = new StatusLine();
  private readonly results = h('div', { class: 'ff-trust-results', attrs: { 'aria-live': 'polite' } });

  constructor(private readonly link: HostLink, private readonly question: () => TrustQuestion) {
    const checkList = h('div', { class: 'ff-trust-checks' }, TRUST_TESTS.map((t) => {
      const box = h('input', { attrs: { type: 'checkbox', id: `ff-trust-${t}`, checked: t !== 'truth' }, on: { change: () => this.refresh() } });
      this.checks.set(t, box);
      return h('label', { class: 'ff-trust-check', attrs: { for: `ff-trust-${t}` } }, [box, h('span', { class: 'ff-trust-check-name', text: TEST_WORDS[t][0] }), h('span', { class: 'ff-trust-check-what', text: TEST_WORDS[t][1] })]);
    }));
    this.box = ['x', 'y', 'width', 'height'].map((k) => h('input', {
      class: 'ff-input ff-trust-box-field', attrs: { type: 'number', min: k === 'x' || k === 'y' ? 0 : 1, step: 1, 'aria-label': `box ${k}`, placeholder: k === 'width' ? 'w' : k === 'height' ? 'h' : k, 'data-box': k },
      on: { input: () => { if (this.boxValue()) this.checks.get('truth')!.checked = true; this.refresh(); } },
    }));
    this.runButton = h('button', { class: 'ff-button', text: 'Run checks', attrs: { id: 'ff-trust-run', type: 'button', 'data-action': 'run-trust', disabled: true } , on: { click: () => this.run() } });
    this.saveButton = h('button', { class: 'ff-button ff-button-secondary', text: 'Save report', attrs: { id: 'ff-trust-save', type: 'button', disabled: true, title: 'Write the report (JSON) and its charts (PNG) beside the image; existing files are kept' }, on: { click: () => void this.save() } });
    this.root = h('section', { class: 'ff-trust', attrs: { id: 'ff-trust', 'aria-labelledby': 'ff-trust-title' } }, [
      h('h2', { class: 'ff-trust-title', text: 'Can I trust this map?', attrs: { id: 'ff-trust-title' } }),
      h('p', { class: 'ff-trust-intro', text: 'A map can look plausible and still say little about the model. These published checks test it on this image.' }),
      checkList,
      h('div', { class: 'ff-trust-box' }, [h('span', { class: 'ff-picker-caption', text: 'Object box (image pixels)' }), ...this.box]),
      h('div', { class: 'ff-trust-run' }, [this.target, this.runButton, this.saveButton]),
      this.status.root,
      this.results,
      h('p', { class: 'ff-trust-caution', text: EXPLAIN.caution }),
    ]);
    this.status.root.className = 'ff-trust-status';
    this.status.root.id = 'ff-trust-status';
    link.onMessage((m) => this.onMessage(m));
  }

  /** Updates the line saying what will be checked (call when the panel's question changes). */
  refresh(): void {
    if (this.failedOpen && !this.opened) return;
    const q = this.question();
    const layer = this.layers.find((l) => l.id === q.layer);
    const fact = this.labels[q.fact] ?? `class ${q.fact}`;
    this.target.textContent = `Checks the maps at ${layer?.short ?? q.layer ?? 'the last stage'} for ${fact}${q.foil !== undefined && this.labels[q.foil] ? ` (contrast with ${this.labels[q.foil]})` : ''}.`;
    const tests = this.chosenTests();
    // Without a box the host looks for the image's mask file and says so when there is none.
    this.runButton.disabled = !this.opened || this.runningId !== undefined || tests.length === 0;
    this.runButton.title = !this.opened ? 'Open a model and image first' : tests.length === 0 ? 'Choose at least one check' : '';
    this.saveButton.disabled = !this.shown || this.saveId !== undefined;
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
    if (m.type === 'init') { this.opened = true; this.labels = m.labels; this.layers = m.layers; this.refresh(); return; }
    if (m.type === 'settingsResult') { this.labels = m.labels; this.refresh(); return; }
    if (m.type === 'notice' && m.level === 'error' && !this.opened) {
      // The open failed (the panel shows why): nothing to check until it is opened again.
      this.failedOpen = true;
      this.target.textContent = 'Nothing to check: the model and image could not be opened.';
      for (const b of Array.from(this.root.querySelectorAll<HTMLButtonElement | HTMLInputElement>('button, input'))) b.disabled = true;
      return;
    }
    if ('id' in m && m.id === this.saveId && this.saveId !== undefined) return this.onSaveAnswer(m);
    if (!('id' in m) || m.id !== this.runningId) return;
    if (m.type === 'trustProgress') {
      const step = m.total > 0 ? ` (step ${Math.min(Math.floor(m.done) + 1, Math.round(m.total))} of ${Math.round(m.total)})` : '';
      this.showProgress(`${stepWords(m.message, this.layers)}${step}`, m.total > 0 ? m.done / m.total : undefined);
    }
    else if (m.type === 'trustResult') { this.runningId = undefined; this.status.show({ kind: 'idle' }); this.shown = { id: m.id, report: m.report }; this.show(m.report, m.maskName); this.refresh(); }
    else if (m.type === 'failed') {
      this.runningId = undefined;
      this.status.show(m.cancelled ? { kind: 'info', message: 'Checks cancelled.' } : { kind: 'error', message: m.message, hint: m.hint });
      this.refresh();
    }
  }

  /** Renders the charts on screen to PNG and asks the host to write them with the report. */
  private async save(): Promise<void> {
    const shown = this.shown;
    if (!shown || this.saveId !== undefined) return;
    this.saveButton.disabled = true;
    try {
      const charts: TrustChartPng[] = [];
      for (const [name, specs] of savedChartSets(shown.report)) charts.push({ name, png: await chartsPngBase64(specs) });
      this.saveId = this.link.request({ type: 'saveTrust', trustId: shown.id, charts });
      this.status.show({ kind: 'progress', message: 'Saving the trust report…', onCancel: () => undefined });
    } catch (e) {
      this.link.post({ type: 'log', level: 'error', message: `trust charts could not be drawn for saving: ${(e as Error).message}`.slice(0, 2000) });
      this.status.show({ kind: 'error', message: 'The charts could not be drawn for saving; nothing was written.', hint: 'Details are in the Factfoil output channel (command: Factfoil: Show Engine Log).' });
    }
    this.refresh();
  }

  private onSaveAnswer(m: ToWebview): void {
    if (m.type !== 'saveResult' && m.type !== 'failed') return;
    this.saveId = undefined;
    if (m.type === 'saveResult') {
      const first = m.files[0];
      this.status.show({ kind: 'info', message: m.message, action: first ? { label: 'Reveal', run: () => this.link.post({ type: 'reveal', path: first }) } : undefined });
    } else {
      this.status.show({ kind: 'error', message: m.message, hint: m.hint });
    }
    this.refresh();
  }

  /** Draws a report: one figure per check, each with its verdict, the rule, its plain explanation and key figures. */
  show(r: TrustReport, maskName?: string): void {
    clear(this.results);
    const label = (i: number | undefined) => (i === undefined ? '' : this.labels[i] ?? `class ${i}`);
    this.results.append(h('p', { class: 'ff-trust-about', text: `${label(r.fact)} at ${this.layers.find((l) => l.id === r.layer)?.short ?? r.layer}, p = ${r.p_fact.toFixed(3)}. Seed ${r.seed}.` }));
    if (r.sanity) {
      const charts = [cascadeChart(r), cascadeChart(r, 'spearman', 'independent')].filter((c) => !!c).map((c) => chartElement(c!));
      const first = r.sanity.cascade[0];
      const key = first ? r.kinds.map((k) => `${k} ${first.flat.includes(k) ? 'flat' : f2(first.spearman[k])}`).join(', ') : '';
      const explain = r.sanity.independent.length ? `${EXPLAIN.cascade} ${EXPLAIN.independent}` : EXPLAIN.cascade;
      const firstBlock = first ? shortName(first.randomized[0], this.layers) : '';
      if (charts.length) this.results.append(figure('sanity', 'Weight randomization', charts, explain, first ? `After randomizing ${firstBlock}: Spearman ${key}.` : '', sanityVerdict(r)));
    }
    if (r.faithfulness) {
      const f = r.faithfulness;
      const key = r.kinds.filter((k) => f.maps[k]).map((k) => {
        const m = f.maps[k]!;
        const b = f.random[m.baseline];
        return `${k} ${f2(m.deletion.auc)} / ${f2(m.insertion.auc)} (random ${f2(b.deletion.auc)} / ${f2(b.insertion.auc)})`;
      }).join('; ');
      this.results.append(figure('faithfulness', 'Deletion and insertion', faithfulnessCharts(r).map(chartElement), `${EXPLAIN.deletion} ${EXPLAIN.insertion}`, `Areas, deletion / insertion: ${key}.`, faithfulnessVerdict(r)));
    }
    if (r.truth) {
      // Say which region was scored: the box typed here, or the image's own mask file by name.
      const region = r.truth.source === 'box' ? 'the box you gave' : maskName ? `the mask file ${maskName}` : 'the image\'s mask file';
      const explain = EXPLAIN.truth.replace('the region you marked', region);
      this.results.append(figure('truth', 'Against the object', [truthTable(r)], explain, `${region[0].toUpperCase()}${region.slice(1)} covers ${(100 * r.truth.mask_fraction).toFixed(1)}% of the image; a map spread evenly would put that share of its energy inside.`, truthVerdict(r)));
    }
    if (r.robustness) this.results.append(figure('robustness', 'Blur and noise', driftCharts(r).map(chartElement), `${EXPLAIN.blur} ${EXPLAIN.noise}`, '', robustnessVerdict(r)));
    for (const n of r.notes) this.results.append(h('p', { class: 'ff-note', text: n, attrs: { role: 'note' } }));
  }
}

function figure(test: TrustTest, title: string, body: Element[], explain: string, figures: string, v?: CheckVerdict): HTMLElement {
  return h('figure', { class: 'ff-trust-figure', attrs: { 'data-test': test, ...(v ? { 'data-verdict': v.verdict } : {}) } }, [
    h('h3', { class: 'ff-trust-figure-title' }, [title, v ? h('span', { class: 'ff-verdict', attrs: { 'data-verdict': v.verdict }, text: VERDICT_WORDS[v.verdict] }) : '']),
    v ? h('ul', { class: 'ff-verdict-lines' }, v.lines.map((l) => h('li', { text: l }))) : '',
    v ? h('p', { class: 'ff-verdict-rule', text: `Rule: ${v.rule}` }) : '',
    h('div', { class: 'ff-trust-charts' }, body),
    h('figcaption', { class: 'ff-trust-explain', text: explain }),
    figures ? h('p', { class: 'ff-trust-figures', text: figures }) : '',
  ]);
}

/** The charts of a report by file name, as the CLI writes them (sanity: cascade and one-at-a-time side by side). */
/** A layer's short name when the tensor is one of the model's layers, else the name as given. */
function shortName(tensor: string | undefined, layers: readonly LayerInfo[]): string {
  if (!tensor) return '';
  return layers.find((l) => l.id === tensor)?.short ?? tensor;
}

/**
 * A progress line in words: "sanity: randomized a, b" becomes "Weight randomization: b";
 * tensor names become the layers' short names.
 */
export function stepWords(message: string | undefined, layers: readonly LayerInfo[]): string {
  if (!message) return 'Running the checks';
  const names = (list: string) => list.split(', ').map((t) => shortName(t.trim(), layers));
  let m: RegExpMatchArray | null;
  if ((m = /^sanity: randomized (.+) alone$/.exec(message))) return `Weight randomization: ${names(m[1]).join(', ')} alone`;
  if ((m = /^sanity: randomized (.+)$/.exec(message))) {
    const n = names(m[1]);
    return `Weight randomization: down to ${n[n.length - 1]} (${n.length} block${n.length > 1 ? 's' : ''})`;
  }
  if ((m = /^robustness: (blur|noise) (.+)$/.exec(message))) return `${m[1] === 'blur' ? 'Blur' : 'Noise'} at strength ${Number(m[2]).toPrecision(2)}`;
  const words: Record<string, string> = {
    'maps of the trained model': 'Maps of the trained model', 'deletion and insertion': 'Deletion and insertion',
    'scores against the region': 'Scoring against the object',
  };
  return words[message] ?? message;
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
