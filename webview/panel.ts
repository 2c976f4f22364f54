/**
 * Stable hooks for end-to-end tests are listed in webview/README-ids.md (keep them in step).
 *
 * The panel: holds what is being asked (kind, variant, fact, foil, layer), asks the host for maps,
 * and keeps every view in step with that state. Views only draw and report user actions.
 */
import { defaultFactFoil, keptFactFoil, rankedClasses, stepClass } from './class-order';
import { isDiverging } from './colormap';
import { clear, h } from './dom';
import type { HostLink } from './host-link';
import { PanelCommand, commandForKey } from './key-bindings';
import { RangeMode, displayRange } from './map-render';
import { DecodedMap, MapStore, Selection, selectionKey, usesFact, usesFoil, variantOf } from './map-store';
import {
  COLORMAPS, ColormapName, DisplayRange, EstimateChoice, InitMessage, MAP_KINDS, MapKind, MapVariant,
  ModelSettings, PROTOCOL_VERSION, ToWebview, VARIANTS_OF,
} from './protocol';
import { questionFor, questionText } from './question';
import { DepthItem, DepthStrip } from './view/depth-strip';
import { buildKeyLegend } from './view/key-legend';
import { LabelPicker } from './view/label-picker';
import { Legend } from './view/legend';
import { MapViewer } from './view/map-viewer';
import { Pin, PinTray } from './view/pin-tray';
import { PredictionList } from './view/predictions';
import { SettingsDrawer } from './view/settings-drawer';
import { StatusLine } from './view/status-line';

interface Prefs {
  colormap: ColormapName;
  opacity: number;
  rangeMode: RangeMode;
  sharedScale: boolean;
  includeRaw: boolean;
}

const KIND_WORDS: Record<MapKind, string> = {
  evidence: 'Evidence', contrast: 'Contrast', mismatch: 'Mismatch', expectancy: 'Expectancy', detail: 'Detail', 'guided-evidence': 'Guided evidence',
};

type Context = Omit<InitMessage, 'type' | 'version' | 'defaults'>;

export class Panel {
  private ctx?: Context;
  private readonly store = new MapStore();
  private sel: Selection = { kind: 'contrast', contrastVariant: 'margin', mismatchVariant: 'weighted', fact: 0, foil: 1 };
  /** Whether the user chose the fact or the foil (kept when new settings change the prediction). */
  private picked = { fact: false, foil: false };
  private layerId?: string;
  private allLayers = false;
  private showMap = true;
  private estimate: EstimateChoice | undefined;
  // One scale across pins is off by default: maps of different kinds have unrelated units.
  private prefs: Prefs = { colormap: 'viridis', opacity: 0.6, rangeMode: 'suggested', sharedScale: false, includeRaw: false };
  private pins: Pin[] = [];
  private nextPinId = 1;
  /** The maps request the progress line belongs to. */
  private activeMapsId?: number;
  /** When the active request's progress started moving, for the percent and time-left estimate. */
  private clock?: { id: number; message: string; t0: number; done0: number };
  /** The last progress of the active maps request (redrawn when the queued layer changes). */
  private lastProgress?: { id: number; done: number; total: number; message?: string };
  private readonly saves = new Map<number, string>();
  private settingsId?: number;
  private labelsFileId?: number;

  // views
  private readonly root: HTMLElement;
  private readonly title = h('div', { class: 'ff-title', attrs: { id: 'ff-title' } });
  private readonly question = h('h1', { class: 'ff-question-text', attrs: { id: 'ff-question' } });
  private readonly questionDetail = h('p', { class: 'ff-question-detail' });
  private readonly estimateBadge = h('span', { class: 'ff-estimate' });
  private readonly where = h('span', { class: 'ff-where' });
  private readonly kindButtons = new Map<MapKind, HTMLButtonElement>();
  private readonly variantSelect: HTMLSelectElement;
  private readonly variantField: HTMLElement;
  private readonly factPicker: LabelPicker;
  private readonly foilPicker: LabelPicker;
  private readonly viewer = new MapViewer();
  private readonly note = h('p', { class: 'ff-note', attrs: { role: 'note' } });
  /** Says when preprocessing was guessed or labels generated, with the way to fix it. */
  private readonly originFlag = h('div', { class: 'ff-origin', attrs: { id: 'ff-origin', role: 'note' } });
  private readonly legend = new Legend();

  private readonly opacity: HTMLInputElement;
  private readonly colormapSelect: HTMLSelectElement;
  private readonly rangeSelect: HTMLSelectElement;
  private readonly predictions: PredictionList;
  private readonly depth: DepthStrip;
  private readonly tray: PinTray;
  private readonly status = new StatusLine();
  private readonly drawer: SettingsDrawer;
  private readonly keys = buildKeyLegend();
  private readonly saveButton: HTMLButtonElement;
  private readonly pinButton: HTMLButtonElement;
  private readonly settingsButton: HTMLButtonElement;
  /** The open failed: nothing to ask about until the panel is opened again. */
  private failed = false;

  constructor(private readonly link: HostLink, mount: HTMLElement) {
    this.prefs = { ...this.prefs, ...this.loadPrefs() };
    const kindBar = h('div', { class: 'ff-kinds', attrs: { role: 'toolbar', 'aria-label': 'Map kind' } });
    MAP_KINDS.forEach((k, i) => {
      const b = h('button', {
        class: 'ff-kind', attrs: { type: 'button', 'data-kind': k, 'aria-pressed': 'false', 'aria-keyshortcuts': String(i + 1), title: `${k} (${i + 1})` },
        on: { click: () => this.setKind(k) },
      }, [h('span', { class: 'ff-kind-key', text: String(i + 1), attrs: { 'aria-hidden': 'true' } }), KIND_WORDS[k]]);
      this.kindButtons.set(k, b);
      kindBar.append(b);
    });
    this.variantSelect = h('select', { class: 'ff-select', attrs: { 'aria-keyshortcuts': 'v' }, on: { change: () => this.setVariant(this.variantSelect.value as MapVariant) } });
    this.variantField = h('div', { class: 'ff-picker ff-variant' }, [h('label', { class: 'ff-picker-caption', text: 'Variant' }), this.variantSelect]);
    this.variantSelect.id = 'ff-variant';
    this.variantField.firstElementChild!.setAttribute('for', 'ff-variant');
    this.factPicker = new LabelPicker('Fact', (i) => this.setFact(i), 'ff-fact', 'ff-fact');
    this.foilPicker = new LabelPicker('Foil', (i) => this.setFoil(i), 'ff-foil', 'ff-foil');

    this.opacity = h('input', { class: 'ff-range', attrs: { id: 'ff-opacity', type: 'range', min: 0, max: 1, step: 0.05, 'aria-keyshortcuts': '- =' },
      on: { input: () => this.setOpacity(Number(this.opacity.value)) } });
    this.colormapSelect = h('select', { class: 'ff-select', attrs: { id: 'ff-colormap', 'aria-keyshortcuts': 'c' }, on: { change: () => this.setColormap(this.colormapSelect.value as ColormapName) } },
      COLORMAPS.map((c) => h('option', { text: c, attrs: { value: c } })));
    this.rangeSelect = h('select', { class: 'ff-select', attrs: { id: 'ff-scale' }, on: { change: () => { this.prefs.rangeMode = this.rangeSelect.value as RangeMode; this.savePrefs(); this.render(); } } },
      [h('option', { text: 'clip at p99.5', attrs: { value: 'suggested' } }), h('option', { text: 'map max', attrs: { value: 'max' } })]);

    this.predictions = new PredictionList((i, asFact) => (asFact ? this.setFact(i) : this.setFoil(i)));
    this.depth = new DepthStrip((id) => this.setLayer(id), (all) => { this.allLayers = all; this.ensureMaps(); this.render(); });
    this.tray = new PinTray({
      remove: (p) => { this.pins = this.pins.filter((q) => q !== p); this.render(); },
      save: (p) => this.save(p.map, PinTray.rangesFor(this.pins, this.prefs.sharedScale)[this.pins.indexOf(p)]),
      open: (p) => { this.sel = { ...p.selection }; this.picked = { fact: true, foil: true }; this.layerId = p.map.data.layer; this.ensureMaps(); this.render(); },
      toggleShared: (v) => { this.prefs.sharedScale = v; this.savePrefs(); this.render(); },
    });
    this.drawer = new SettingsDrawer({
      apply: (s) => this.applySettings(s),
      browseLabels: () => { this.labelsFileId = this.link.request({ type: 'pickLabelsFile' }); },
    }, (v) => { this.prefs.includeRaw = v; this.savePrefs(); });

    this.pinButton = h('button', { class: 'ff-button ff-button-secondary', text: 'Pin', attrs: { id: 'ff-pin', type: 'button', 'aria-keyshortcuts': 'p', title: 'Pin the current map (P)' }, on: { click: () => this.pinCurrent() } });
    this.saveButton = h('button', { class: 'ff-button', text: 'Save', attrs: { id: 'ff-save', type: 'button', 'aria-keyshortcuts': 's', title: 'Save the map beside the image (S)' }, on: { click: () => this.saveCurrent() } });
    this.settingsButton = h('button', { class: 'ff-button ff-button-quiet', text: 'Preprocessing and labels…', attrs: { id: 'ff-open-settings', type: 'button', 'aria-keyshortcuts': ',', title: 'Preprocessing and labels (,)' }, on: { click: () => this.openSettings() } });
    const head = h('header', { class: 'ff-head' }, [
      this.title,
      h('div', { class: 'ff-head-actions' }, [
        this.pinButton, this.saveButton, this.settingsButton,
        h('button', { class: 'ff-button ff-button-quiet ff-keys-button', text: '?', attrs: { id: 'ff-keys', type: 'button', 'aria-keyshortcuts': '?', 'aria-label': 'Keyboard', title: 'Keyboard (?)' }, on: { click: () => this.keys.showModal() } }),
      ]),
    ]);
    const display = h('div', { class: 'ff-display' }, [
      h('div', { class: 'ff-field ff-field-inline' }, [h('label', { text: 'Opacity', attrs: { for: 'ff-opacity' } }), this.opacity]),
      h('div', { class: 'ff-field ff-field-inline' }, [h('label', { text: 'Colours', attrs: { for: 'ff-colormap' } }), this.colormapSelect]),
      h('div', { class: 'ff-field ff-field-inline' }, [h('label', { text: 'Scale', attrs: { for: 'ff-scale' } }), this.rangeSelect]),
      this.legend.root,
    ]);
    this.root = h('main', { class: 'ff-panel', attrs: { 'data-state': 'waiting' } }, [
      head,
      h('section', { class: 'ff-question', attrs: { 'aria-live': 'polite' } }, [this.question, h('div', { class: 'ff-question-sub' }, [this.questionDetail, this.where, this.estimateBadge]), this.originFlag]),
      this.status.root,
      h('div', { class: 'ff-controls' }, [kindBar, h('div', { class: 'ff-pickers' }, [this.factPicker.root, this.foilPicker.root, this.variantField])]),
      h('section', { class: 'ff-view', attrs: { 'aria-label': 'Map' } }, [this.viewer.root, this.note, display]),
      h('aside', { class: 'ff-side' }, [this.predictions.root]),
      this.depth.root,
      this.tray.root,
      h('footer', { class: 'ff-caution', text: 'A map explains the model, not the world: validate before any safety-critical use.' }),
      this.drawer.root,
      this.keys,
    ]);
    this.legend.root.id = 'ff-legend';
    this.originFlag.hidden = true;
    clear(mount);
    mount.append(this.root);
    this.question.textContent = 'Waiting for the model…';
    document.addEventListener('keydown', (e) => this.onKey(e));
    link.onMessage((m) => this.onMessage(m));
    link.post({ type: 'ready', version: PROTOCOL_VERSION });
  }

  /** The question on screen, for views beside the panel (the trust checks). */
  currentQuestion(): { layer?: string; fact: number; foil?: number } {
    return { layer: this.layerId, fact: this.sel.fact, foil: this.sel.foil };
  }

  // ---- messages ---------------------------------------------------------------------------------

  private onMessage(m: ToWebview): void {
    try {
      this.handle(m);
    } catch (e) {
      const msg = e instanceof Error ? `${e.message}\n${e.stack ?? ''}` : String(e);
      this.link.post({ type: 'log', level: 'error', message: `panel failed on ${m.type}: ${msg}`.slice(0, 2000) });
      this.status.show({ kind: 'error', message: `The panel could not show the ${m.type} message.`, hint: 'Details are in the Factfoil output log.' });
    }
  }

  private handle(m: ToWebview): void {
    switch (m.type) {
      case 'init': return this.onInit(m);
      case 'mapsResult': {
        this.store.put(m.id, m.maps, m.final);
        if (m.id === this.activeMapsId && m.final) {
          this.activeMapsId = undefined;
          this.clock = undefined;
          this.lastProgress = undefined;
          this.clearProgress();
          // The shown layer came first; now the layer waiting in the queue, or the remaining stages.
          this.ensureMaps();
        }
        return this.render();
      }
      case 'progress': {
        const isActive = m.id === this.activeMapsId || this.saves.has(m.id) || m.id === this.settingsId;
        if (!isActive) return;
        if (m.id === this.activeMapsId) { this.lastProgress = m; return this.showMapsProgress(); }
        const what = m.message ?? (this.saves.has(m.id) ? 'Saving…' : 'Computing maps…');
        this.status.show({ kind: 'progress', message: what, fraction: m.total > 0 ? m.done / m.total : undefined, onCancel: () => this.cancel(m.id) });
        return;
      }
      case 'failed': {
        this.store.end(m.id);
        const known = m.id === this.activeMapsId || this.saves.delete(m.id) || m.id === this.settingsId || m.id === this.labelsFileId;
        if (m.id === this.activeMapsId) this.activeMapsId = undefined;
        if (m.id === this.settingsId) this.settingsId = undefined;
        if (known) this.status.show(m.cancelled ? { kind: 'info', message: 'Cancelled.' } : { kind: 'error', message: m.message, hint: m.hint });
        return this.render();
      }
      case 'saveResult': {
        if (!this.saves.delete(m.id)) return;
        const first = m.files[0];
        this.status.show({ kind: 'info', message: m.message, action: first ? { label: 'Reveal', run: () => this.link.post({ type: 'reveal', path: first }) } : undefined });
        return;
      }
      case 'settingsResult': {
        if (m.id !== this.settingsId || !this.ctx) return;
        this.settingsId = undefined;
        this.ctx = { ...this.ctx, settings: m.settings, labels: m.labels, prediction: m.prediction, expected: m.expected, image: m.image, ...(m.origin ? { origin: m.origin } : {}) };
        this.store.clear();
        this.activeMapsId = undefined;
        this.sel = { ...this.sel, ...keptFactFoil(this.sel, this.picked, m.prediction, m.labels.length, m.expected) };
        this.viewer.setImage(m.image);
        this.status.show({ kind: 'info', message: 'Settings applied; maps recomputed with the new preprocessing.' });
        this.ensureMaps();
        return this.render();
      }
      case 'labelsFileResult': {
        if (m.id === this.labelsFileId && m.path) this.drawer.setLabelsFile(m.path);
        return;
      }
      case 'notice':
        // An error before the first init means the model or image could not be opened.
        if (!this.ctx && m.level === 'error') return this.showOpenFailed(m.message, m.hint);
        this.status.show(m.level === 'error' || m.level === 'warning' ? { kind: 'error', message: m.message, hint: m.hint } : { kind: 'info', message: m.message });
        return;
    }
  }

  /** A failed open: no stale title, badges or live actions; the whole error stays readable. */
  private showOpenFailed(message: string, hint?: string): void {
    this.failed = true;
    this.root.dataset.state = 'failed';
    this.title.replaceChildren(h('span', { class: 'ff-title-image', text: 'Not opened' }));
    this.question.textContent = 'This model and image could not be opened.';
    this.questionDetail.textContent = '';
    this.where.textContent = '';
    this.estimateBadge.hidden = true;
    this.legend.root.hidden = true;
    document.title = 'Factfoil: not opened';
    for (const b of Array.from(this.root.querySelectorAll<HTMLButtonElement | HTMLInputElement | HTMLSelectElement>('button, input, select'))) {
      if (b.id !== 'ff-keys') b.disabled = true;
    }
    this.status.show({ kind: 'error', message, hint: hint ?? 'Fix the cause, then open the panel again (command: Factfoil: Explain Image with Factfoil…).' });
  }

  private onInit(m: InitMessage): void {
    if (m.version !== PROTOCOL_VERSION) {
      this.status.show({ kind: 'error', message: `The extension speaks panel protocol ${m.version}, this panel ${PROTOCOL_VERSION}.`, hint: 'Reload the window after updating Factfoil.' });
    }
    if (this.failed) {
      this.failed = false;
      for (const b of Array.from(this.root.querySelectorAll<HTMLButtonElement | HTMLInputElement | HTMLSelectElement>('button, input, select'))) b.disabled = false;
      this.status.show({ kind: 'idle' });
    }
    const { type: _t, version: _v, defaults, ...ctx } = m;
    this.ctx = ctx;
    this.store.clear();
    this.pins = [];
    this.picked = { fact: false, foil: false };
    const d = defaultFactFoil(m.prediction, m.labels.length, m.expected);
    this.sel = {
      kind: defaults?.kind ?? this.sel.kind,
      contrastVariant: defaults?.contrastVariant ?? 'margin',
      mismatchVariant: defaults?.mismatchVariant ?? 'weighted',
      ...d,
    };
    // The host's defaults (user settings) apply unless this panel already has its own choice.
    const saved = this.loadPrefs();
    if (defaults?.colormap && saved.colormap === undefined) this.prefs.colormap = defaults.colormap;
    if (defaults?.opacity !== undefined && saved.opacity === undefined) this.prefs.opacity = defaults.opacity;
    this.estimate = defaults?.estimate;
    const steps = this.steppingLayers();
    this.layerId = steps[steps.length - 1];
    this.viewer.setImage(m.image);
    this.root.dataset.state = 'ready';
    this.ensureMaps();
    this.render();
  }

  // ---- what is asked ----------------------------------------------------------------------------

  private steppingLayers(): string[] {
    const layers = this.ctx?.layers ?? [];
    const stages = layers.filter((l) => l.stage);
    return (this.allLayers || stages.length === 0 ? layers : stages).map((l) => l.id);
  }

  /** The layers the strip shows: the stepping list, or what the host answered when that differs (detail maps live at the input). */
  private visibleLayers(): DepthItem[] {
    const entry = this.store.get(selectionKey(this.sel));
    const byId = new Map((this.ctx?.layers ?? []).map((l) => [l.id, l]));
    const steps = this.steppingLayers();
    const answered = entry ? [...entry.maps.values()] : [];
    if (answered.length > 0 && answered.every((m) => !steps.includes(m.data.layer))) {
      return answered.map((m) => ({ id: m.data.layer, short: m.data.layerShort, map: m }));
    }
    const waiting = entry?.pendingId !== undefined;
    return steps.map((id) => ({ id, short: byId.get(id)?.short ?? id, map: entry?.maps.get(id), queued: waiting && !entry?.asked.has(id) }));
  }

  private currentMap(): DecodedMap | undefined {
    const items = this.visibleLayers();
    const hit = items.find((i) => i.id === this.layerId) ?? (items.length === 1 ? items[0] : undefined);
    return hit?.map;
  }

  /** Asks the host for the current question's maps at every stepping layer not yet asked. */
  private ensureMaps(): void {
    if (!this.ctx) return;
    const key = selectionKey(this.sel);
    const entry = this.store.get(key);
    if (entry?.pendingId !== undefined) { this.activeMapsId = entry.pendingId; return; }
    const all = this.steppingLayers().filter((l) => !entry?.asked.has(l));
    if (all.length === 0 || (entry && this.sel.kind === 'detail' && entry.maps.size > 0)) return;
    if (this.activeMapsId !== undefined) this.cancel(this.activeMapsId, true);
    const { kind } = this.sel;
    // A mismatch map sweeps every class, and a shallow layer costs most of the backward pass: the
    // shown layer is asked alone first, the other stages after it (or when stepped to).
    const wanted = kind === 'mismatch' && this.layerId && all.includes(this.layerId) && all.length > 1 ? [this.layerId] : all;
    const id = this.link.request({
      type: 'requestMaps', kind, variant: variantOf(this.sel), fact: this.sel.fact,
      foil: usesFoil(kind) ? this.sel.foil : undefined, layers: wanted, estimate: this.estimate,
    });
    this.store.begin(key, id, wanted);
    this.activeMapsId = id;
    this.clock = undefined;
    this.lastProgress = undefined;
    const byId = new Map((this.ctx.layers).map((l) => [l.id, l.short]));
    const what = wanted.length === 1 ? `Computing the map at ${byId.get(wanted[0]) ?? wanted[0]}…` : 'Computing maps…';
    this.status.show({ kind: 'progress', message: what, onCancel: () => this.cancel(id) });
  }

  /** The shown layer waits behind a request that does not include it (asked after it ends). */
  private queuedLayer(): string | undefined {
    const entry = this.store.get(selectionKey(this.sel));
    if (!entry || entry.pendingId === undefined || !this.layerId || entry.asked.has(this.layerId)) return undefined;
    if (!this.steppingLayers().includes(this.layerId)) return undefined;
    return this.layerId;
  }

  /** Progress of the active maps request: words, percent, time left once it can be judged, and what waits. */
  private showMapsProgress(): void {
    const m = this.lastProgress;
    const id = this.activeMapsId;
    if (!m || id === undefined || m.id !== id) return;
    const now = performance.now();
    const message = m.message ?? 'Computing maps…';
    // A new phase (probe, then exact) restarts the clock.
    if (!this.clock || this.clock.id !== id || this.clock.message !== message || m.done < this.clock.done0) this.clock = { id, message, t0: now, done0: m.done };
    const parts = [message];
    if (m.total > 0) parts.push(`${Math.floor((100 * m.done) / m.total)}%`);
    const moved = m.done - this.clock.done0;
    const elapsed = (now - this.clock.t0) / 1000;
    if (m.total > 0 && moved > 0 && elapsed >= 0.5 && m.done < m.total) parts.push(`about ${formatSeconds(((m.total - m.done) / moved) * elapsed)} left`);
    const queued = this.queuedLayer();
    if (queued) parts.push(`then ${this.shortOf(queued)} (queued)`);
    this.status.show({ kind: 'progress', message: parts.join(' · '), fraction: m.total > 0 ? m.done / m.total : undefined, onCancel: () => this.cancel(id) });
  }

  private shortOf(layer: string): string {
    return this.ctx?.layers.find((l) => l.id === layer)?.short ?? layer;
  }

  private cancel(id: number, quiet = false): void {
    this.link.post({ type: 'cancel', id });
    this.store.end(id);
    this.saves.delete(id);
    if (id === this.activeMapsId) this.activeMapsId = undefined;
    if (!quiet) this.status.show({ kind: 'info', message: 'Cancelled.' });
  }

  private clearProgress(): void {
    if (this.status.status.kind === 'progress') this.status.show({ kind: 'idle' });
  }

  // ---- user actions -----------------------------------------------------------------------------

  private setKind(kind: MapKind): void {
    this.sel = { ...this.sel, kind };
    this.afterSelection();
  }

  private setVariant(v: MapVariant): void {
    if (this.sel.kind === 'contrast') this.sel = { ...this.sel, contrastVariant: v };
    if (this.sel.kind === 'mismatch') this.sel = { ...this.sel, mismatchVariant: v };
    this.afterSelection();
  }

  private nextVariant(): void {
    const all = VARIANTS_OF[this.sel.kind];
    const cur = variantOf(this.sel);
    if (!all || !cur) return;
    this.setVariant(all[(all.indexOf(cur) + 1) % all.length]);
  }

  private setFact(i: number): void {
    let { foil } = this.sel;
    if (foil === i) { foil = this.sel.fact; this.picked.foil = true; } // swap, so fact and foil never coincide
    this.picked.fact = true;
    this.sel = { ...this.sel, fact: i, foil };
    if (!usesFact(this.sel.kind)) this.sel.kind = 'evidence';
    this.afterSelection();
  }

  /** A foil turns a view without one into a contrast; from the mismatch view it is the per-class map (loss variant, DESIGN §4). */
  private setFoil(i: number): void {
    if (i === this.sel.fact) return;
    const fromMismatch = this.sel.kind === 'mismatch';
    this.picked.foil = true;
    this.sel = { ...this.sel, foil: i };
    if (!usesFoil(this.sel.kind)) {
      this.sel.kind = 'contrast';
      if (fromMismatch) this.sel.contrastVariant = 'loss';
    }
    this.afterSelection();
  }

  private stepClass(which: 'fact' | 'foil', delta: 1 | -1): void {
    if (!this.ctx) return;
    const ranked = rankedClasses(this.ctx.prediction, this.ctx.labels.length);
    const noFoil = !usesFoil(this.sel.kind) && this.sel.kind !== 'mismatch';
    if (which === 'fact' || noFoil) {
      if (!usesFact(this.sel.kind) && which === 'fact') return;
      this.setFact(stepClass(ranked, this.sel.fact, delta));
    } else {
      this.setFoil(stepClass(ranked, this.sel.foil, delta, this.sel.fact));
    }
  }

  private setLayer(id: string): void {
    this.layerId = id;
    // A layer not asked yet: asked now, or queued behind the running request (which then asks it next).
    this.ensureMaps();
    if (this.queuedLayer()) {
      if (this.lastProgress) this.showMapsProgress();
      else if (this.activeMapsId !== undefined) { const a = this.activeMapsId; this.status.show({ kind: 'progress', message: `Computing maps… · then ${this.shortOf(id)} (queued)`, onCancel: () => this.cancel(a) }); }
    }
    this.render();
  }

  private stepLayer(delta: 1 | -1): void {
    const items = this.visibleLayers();
    if (items.length === 0) return;
    const i = items.findIndex((it) => it.id === this.layerId);
    const j = Math.min(Math.max((i < 0 ? items.length - 1 : i) + delta, 0), items.length - 1);
    this.setLayer(items[j].id);
  }

  private afterSelection(): void {
    this.ensureMaps();
    this.render();
  }

  private setOpacity(v: number): void {
    this.prefs.opacity = Math.min(Math.max(Math.round(v * 100) / 100, 0), 1);
    this.showMap = true;
    this.savePrefs();
    this.render();
  }

  private setColormap(c: ColormapName): void {
    this.prefs.colormap = c;
    this.savePrefs();
    this.render();
  }

  private currentRange(map: DecodedMap): DisplayRange {
    return displayRange(map.data.range, map.values, this.prefs.rangeMode, isDiverging(this.prefs.colormap));
  }

  private pinCurrent(): void {
    const map = this.currentMap();
    if (!map || !this.ctx) return;
    if (this.pins.some((p) => p.map.data.mapId === map.data.mapId)) {
      this.status.show({ kind: 'info', message: 'This map is already pinned.' });
      return;
    }
    const q = this.questionNow();
    this.pins.push({ pinId: this.nextPinId++, map, question: questionText(q), range: this.currentRange(map), selection: { ...this.sel } });
    this.render();
  }

  private saveCurrent(): void {
    const map = this.currentMap();
    if (map) this.save(map, this.currentRange(map));
  }

  private save(map: DecodedMap, range: DisplayRange): void {
    const id = this.link.request({ type: 'save', mapId: map.data.mapId, colormap: this.prefs.colormap, opacity: this.prefs.opacity, range, includeRaw: this.prefs.includeRaw });
    this.saves.set(id, map.data.mapId);
    this.status.show({ kind: 'progress', message: 'Saving…', onCancel: () => this.cancel(id) });
  }

  private openSettings(): void {
    if (this.ctx) this.drawer.open(this.ctx.settings, this.prefs.includeRaw, this.ctx.gray === true);
  }

  private applySettings(s: ModelSettings): void {
    this.settingsId = this.link.request({ type: 'updateSettings', settings: s });
    const id = this.settingsId;
    this.status.show({ kind: 'progress', message: 'Applying settings…', onCancel: () => this.cancel(id) });
  }

  // ---- keys -------------------------------------------------------------------------------------

  private onKey(e: KeyboardEvent): void {
    if (this.drawer.root.open || this.keys.open) return; // dialogs keep their own keys (Escape closes them)
    const t = e.target as HTMLElement | null;
    if (t && (t.closest('input, select, textarea, [contenteditable="true"]'))) return;
    const cmd = commandForKey(e);
    if (!cmd || !this.ctx) return;
    if (t?.closest('.ff-pin') && (cmd === 'escape')) return;
    e.preventDefault();
    this.run(cmd);
  }

  /** Runs a keyboard command (public for the key legend and tests of the dispatch table). */
  run(cmd: PanelCommand): void {
    if (cmd.startsWith('kind:')) return this.setKind(cmd.slice(5) as MapKind);
    switch (cmd) {
      case 'layer-shallower': return this.stepLayer(-1);
      case 'layer-deeper': return this.stepLayer(1);
      case 'foil-prev': return this.stepClass('foil', -1);
      case 'foil-next': return this.stepClass('foil', 1);
      case 'fact-prev': return this.stepClass('fact', -1);
      case 'fact-next': return this.stepClass('fact', 1);
      case 'variant-next': return this.nextVariant();
      case 'pin': return this.pinCurrent();
      case 'save': return this.saveCurrent();
      case 'toggle-shared-scale': this.prefs.sharedScale = !this.prefs.sharedScale; this.savePrefs(); return this.render();
      case 'colormap-next': return this.setColormap(COLORMAPS[(COLORMAPS.indexOf(this.prefs.colormap) + 1) % COLORMAPS.length]);
      case 'opacity-down': return this.setOpacity(this.prefs.opacity - 0.1);
      case 'opacity-up': return this.setOpacity(this.prefs.opacity + 0.1);
      case 'toggle-map': this.showMap = !this.showMap; return this.render();
      case 'focus-fact': return usesFact(this.sel.kind) ? this.factPicker.focus() : undefined;
      case 'focus-foil': return this.foilPicker.focus();
      case 'settings': return this.openSettings();
      case 'help': return this.keys.showModal();
      case 'escape': {
        const s = this.status.status;
        if (s.kind === 'progress') s.onCancel();
        else if (s.kind !== 'idle') this.status.show({ kind: 'idle' });
        return;
      }
    }
  }

  // ---- drawing ----------------------------------------------------------------------------------

  private questionNow() {
    const labels = this.ctx?.labels ?? [];
    return questionFor(this.sel.kind, variantOf(this.sel), labels[this.sel.fact] ?? '?', labels[this.sel.foil]);
  }

  private render(): void {
    const ctx = this.ctx;
    if (!ctx) return;
    const { labels, prediction } = ctx;
    const { kind } = this.sel;
    this.title.replaceChildren(
      h('span', { class: 'ff-title-image', text: ctx.image.name, attrs: { title: ctx.image.name } }),
      h('span', { class: 'ff-title-model', text: ctx.model.name, attrs: { title: `${ctx.model.name}, scores: ${ctx.model.scores}` } }),
    );

    const q = this.questionNow();
    this.question.replaceChildren(...q.parts.map((p) => ('text' in p ? p.text : h('em', { class: 'ff-class', text: p.label }))));
    this.questionDetail.textContent = q.detail;
    document.title = questionText(q);

    for (const [k, b] of this.kindButtons) b.setAttribute('aria-pressed', String(k === kind));
    const variants = VARIANTS_OF[kind];
    this.variantField.hidden = !variants;
    if (variants) {
      this.variantSelect.replaceChildren(...variants.map((v) => h('option', { text: v, attrs: { value: v } })));
      this.variantSelect.value = variantOf(this.sel) ?? variants[0];
    }
    const pMap = new Map(prediction.map((p) => [p.index, p.p]));
    const source = { labels, ranked: rankedClasses(prediction, labels.length), probability: (i: number) => pMap.get(i) };
    this.factPicker.update(source, this.sel.fact, usesFact(kind));
    this.foilPicker.update(source, this.sel.foil, true, this.sel.fact);
    this.foilPicker.root.classList.toggle('is-inactive', !usesFoil(kind));
    this.factPicker.root.classList.toggle('is-inactive', !usesFact(kind));

    const entry = this.store.get(selectionKey(this.sel));
    const map = this.currentMap();
    const range = map ? this.currentRange(map) : { lo: 0, hi: 1 };
    const queued = this.queuedLayer();
    this.viewer.show(map, range, this.prefs.colormap, this.prefs.opacity, this.showMap, entry?.pendingId !== undefined, queued ? `Queued: the map at ${this.shortOf(queued)} is computed when the running request ends.` : undefined);
    this.note.textContent = map?.data.note ?? '';
    this.note.hidden = !map?.data.note;
    this.legend.root.hidden = !map;
    if (map) this.legend.update(this.prefs.colormap, range, this.prefs.rangeMode === 'max' ? 'scale to the map maximum' : 'clipped at p99.5');
    this.opacity.value = String(this.prefs.opacity);
    this.colormapSelect.value = this.prefs.colormap;
    this.rangeSelect.value = this.prefs.rangeMode;

    this.where.textContent = map ? `at ${map.data.layerShort}, ${map.data.rawWidth}×${map.data.rawHeight}${this.showMap ? '' : ' · map hidden (M)'}` : '';
    const est = map?.data.estimate;
    this.estimateBadge.hidden = !est;
    this.estimateBadge.dataset.mode = est?.mode ?? '';
    if (est) {
      const refining = est.mode === 'probe' && entry?.pendingId !== undefined;
      this.estimateBadge.textContent = est.mode === 'exact' ? 'exact' : refining ? `estimate (K=${est.k}) — refining…` : `probe estimate, K=${est.k}`;
    }

    this.predictions.update({ labels, prediction, expected: ctx.expected, fact: this.sel.fact, foil: usesFoil(kind) ? this.sel.foil : undefined, clickPicks: kind === 'evidence' || kind === 'detail' || kind === 'guided-evidence' ? 'fact' : 'foil' });
    const items = this.visibleLayers();
    const layers = ctx.layers;
    this.depth.update(items, map?.data.layer ?? this.layerId, this.prefs.colormap, this.allLayers, layers.some((l) => !l.stage) && layers.some((l) => l.stage));
    this.tray.update(this.pins, ctx.image, this.prefs.colormap, this.prefs.sharedScale);
    this.saveButton.disabled = !map;
    this.pinButton.disabled = !map;
    this.root.dataset.kind = kind;
    this.renderOrigin();
  }

  /** A visible flag when the model's preprocessing was guessed or its labels generated, with the drawer to fix it. */
  private renderOrigin(): void {
    const o = this.ctx?.origin;
    const lines: string[] = [];
    if (o?.preprocessing === 'guessed') lines.push('Preprocessing is guessed from the model\'s input shape: the maps are only as right as that guess. Set the size, scale, mean and std the model was trained with.');
    if (o?.labels === 'generated') lines.push('No labels were found, so classes read "class 0", "class 1", …: choose a labels file (one label per line), or put labels.txt beside the model.');
    this.originFlag.hidden = lines.length === 0;
    this.originFlag.dataset.preprocessing = o?.preprocessing ?? '';
    this.originFlag.dataset.labels = o?.labels ?? '';
    if (lines.length === 0) { clear(this.originFlag); return; }
    this.originFlag.replaceChildren(
      h('span', { class: 'ff-origin-icon', text: '!', attrs: { 'aria-hidden': 'true' } }),
      h('div', { class: 'ff-origin-text' }, lines.map((l) => h('p', { text: l }))),
      h('button', { class: 'ff-button ff-button-small ff-button-secondary', text: 'Open Preprocessing and labels…', attrs: { id: 'ff-origin-fix', type: 'button' }, on: { click: () => this.openSettings() } }),
    );
  }

  // ---- preferences ------------------------------------------------------------------------------

  private loadPrefs(): Partial<Prefs> {
    const s = this.link.loadState<Prefs>();
    const out: Partial<Prefs> = {};
    if (COLORMAPS.includes(s.colormap as ColormapName)) out.colormap = s.colormap;
    if (typeof s.opacity === 'number' && s.opacity >= 0 && s.opacity <= 1) out.opacity = s.opacity;
    if (s.rangeMode === 'suggested' || s.rangeMode === 'max') out.rangeMode = s.rangeMode;
    if (typeof s.sharedScale === 'boolean') out.sharedScale = s.sharedScale;
    if (typeof s.includeRaw === 'boolean') out.includeRaw = s.includeRaw;
    return out;
  }

  private savePrefs(): void { this.link.saveState(this.prefs); }
}

/** "12 s", "3 min": rounded up, for a time-left estimate. */
export function formatSeconds(s: number): string {
  if (!Number.isFinite(s) || s < 0) return '?';
  if (s < 60) return `${Math.max(1, Math.ceil(s))} s`;
  return `${Math.ceil(s / 60)} min`;
}
