/**
 * Preprocessing and labels, edited in a side drawer and sent to the host as one update
 * (the host writes them to the model's sidecar and answers with the new prediction).
 */
import { h, uid } from '../dom';
import type { ModelSettings, Preprocessing, ResizeMode } from '../protocol';
import { RESIZE_MODES } from '../protocol';

/** Common input conventions (common practice, no source; the mean/std triple is the widely used one). */
const PRESETS: { name: string; scale: number; mean: [number, number, number]; std: [number, number, number] }[] = [
  { name: 'Unit range: x / 255', scale: 1 / 255, mean: [0, 0, 0], std: [1, 1, 1] },
  { name: 'Symmetric: x / 127.5 − 1', scale: 1 / 127.5, mean: [1, 1, 1], std: [1, 1, 1] },
  { name: 'Standardised: (x / 255 − mean) / std', scale: 1 / 255, mean: [0.485, 0.456, 0.406], std: [0.229, 0.224, 0.225] },
  { name: 'Raw: 0 … 255', scale: 1, mean: [0, 0, 0], std: [1, 1, 1] },
];

const RESIZE_WORDS: Record<ResizeMode, string> = { stretch: 'Stretch to size', crop: 'Shorter side, then centre crop', letterbox: 'Letterbox (fit and pad)' };

function field(caption: string, control: HTMLElement): HTMLElement {
  const id = uid('ff-set');
  control.id = id;
  return h('div', { class: 'ff-field' }, [h('label', { text: caption, attrs: { for: id } }), control]);
}

function numberInput(step: string, name: string): HTMLInputElement {
  return h('input', { class: 'ff-input', attrs: { type: 'number', step, name, inputmode: 'decimal' } });
}

function select<T extends string>(values: readonly T[], words: (v: T) => string, name: string): HTMLSelectElement {
  return h('select', { class: 'ff-select', attrs: { name } }, values.map((v) => h('option', { text: words(v), attrs: { value: v } })));
}

export interface SettingsActions {
  apply(settings: ModelSettings): void;
  browseLabels(): void;
}

export class SettingsDrawer {
  readonly root: HTMLDialogElement;
  private readonly width = numberInput('1', 'width');
  private readonly height = numberInput('1', 'height');
  private readonly resize = select(RESIZE_MODES, (v) => RESIZE_WORDS[v], 'resize');
  private readonly channels = select(['RGB', 'BGR', 'GRAY'] as const, (v) => v, 'channels');
  /** A one-channel model: Channels reads GRAY (set by the model, not here); the order sent back is kept. */
  private gray?: { keep: 'RGB' | 'BGR' };
  private readonly layout = select(['NCHW', 'NHWC'] as const, (v) => v, 'layout');
  private readonly scale = numberInput('any', 'scale');
  private readonly mean = [0, 1, 2].map((c) => numberInput('any', `mean${c}`));
  private readonly std = [0, 1, 2].map((c) => numberInput('any', `std${c}`));
  private readonly labelsFile = h('input', { class: 'ff-input', attrs: { type: 'text', name: 'labelsFile', placeholder: 'labels from the model', spellcheck: 'false' } });
  readonly includeRaw = h('input', { attrs: { type: 'checkbox', name: 'includeRaw' } });
  private readonly error = h('p', { class: 'ff-form-error', attrs: { role: 'alert', id: 'ff-drawer-error' } });

  constructor(private readonly actions: SettingsActions, onIncludeRaw: (v: boolean) => void) {
    const preset = h('select', { class: 'ff-select', attrs: { name: 'preset' }, on: { change: () => this.applyPreset(preset) } }, [
      h('option', { text: 'Choose a convention…', attrs: { value: '' } }),
      ...PRESETS.map((p, i) => h('option', { text: p.name, attrs: { value: String(i) } })),
    ]);
    this.includeRaw.addEventListener('change', () => onIncludeRaw(this.includeRaw.checked));
    const triple = (caption: string, inputs: HTMLInputElement[]) => h('fieldset', { class: 'ff-triple' }, [
      h('legend', { text: caption }),
      ...inputs.map((inp, c) => { inp.setAttribute('aria-label', `${caption} ${'RGB'[c]}`); return h('span', { class: 'ff-triple-cell' }, [h('span', { class: 'ff-triple-tag', text: 'RGB'[c] }), inp]); }),
    ]);
    // No <form> submit: VS Code's webview sandbox blocks form submission (no allow-forms), so
    // Apply is a plain button and Enter in a field does the same.
    const form = h('div', { class: 'ff-settings', attrs: { role: 'group' }, on: { keydown: (e) => this.onKey(e) } }, [
      h('header', { class: 'ff-drawer-head' }, [h('h2', { class: 'ff-h2', text: 'Preprocessing and labels' })]),
      h('div', { class: 'ff-field-row' }, [field('Width', this.width), field('Height', this.height)]),
      field('Resize', this.resize),
      h('div', { class: 'ff-field-row' }, [field('Channels', this.channels), field('Layout', this.layout)]),
      field('Preset', preset),
      field('Scale (× pixel value)', this.scale),
      triple('Mean', this.mean),
      triple('Std', this.std),
      h('div', { class: 'ff-field' }, [
        h('label', { text: 'Labels file', attrs: { for: (this.labelsFile.id = uid('ff-set')) } }),
        h('div', { class: 'ff-inline' }, [this.labelsFile,
          h('button', { class: 'ff-button ff-button-secondary', text: 'Browse…', attrs: { type: 'button' }, on: { click: () => this.actions.browseLabels() } })]),
      ]),
      h('label', { class: 'ff-check' }, [this.includeRaw, ' Save also writes the raw layer map (.npy)']),
      this.error,
      h('footer', { class: 'ff-drawer-foot' }, [
        h('button', { class: 'ff-button', text: 'Apply', attrs: { type: 'button', id: 'ff-drawer-apply' }, on: { click: () => this.apply() } }),
        h('button', { class: 'ff-button ff-button-secondary', text: 'Close', attrs: { type: 'button', id: 'ff-drawer-close' }, on: { click: () => this.root.close() } }),
      ]),
    ]);
    this.root = h('dialog', { class: 'ff-drawer', attrs: { id: 'ff-drawer', 'aria-label': 'Preprocessing and labels' } }, [form]);
  }

  open(settings: ModelSettings, includeRaw: boolean, gray = false): void {
    const p = settings.preprocessing;
    this.gray = gray ? { keep: p.channels } : undefined;
    const grayOption = this.channels.querySelector<HTMLOptionElement>('option[value="GRAY"]')!;
    grayOption.disabled = !gray;
    for (const o of Array.from(this.channels.options)) if (o.value !== 'GRAY') o.disabled = gray;
    this.channels.title = gray ? 'The model takes one grey channel (luma of the image): set by the model' : 'GRAY is for models with one input channel';
    this.width.value = String(p.width);
    this.height.value = String(p.height);
    this.resize.value = p.resize;
    this.channels.value = gray ? 'GRAY' : p.channels;
    this.layout.value = p.layout;
    this.scale.value = String(p.scale);
    p.mean.forEach((v, c) => { this.mean[c].value = String(v); });
    p.std.forEach((v, c) => { this.std[c].value = String(v); });
    this.labelsFile.value = settings.labelsFile ?? '';
    this.includeRaw.checked = includeRaw;
    this.error.textContent = '';
    if (!this.root.open) this.root.showModal();
    this.width.focus();
  }

  setLabelsFile(path: string): void { this.labelsFile.value = path; }

  private applyPreset(sel: HTMLSelectElement): void {
    const p = PRESETS[Number(sel.value)];
    if (!p) return;
    this.scale.value = String(p.scale);
    p.mean.forEach((v, c) => { this.mean[c].value = String(v); });
    p.std.forEach((v, c) => { this.std[c].value = String(v); });
    sel.value = '';
  }

  /** Reads the form; a one-line reason when a field is not a usable number. */
  read(): ModelSettings | string {
    const n = (inp: HTMLInputElement, what: string, ok: (v: number) => boolean): number | string => {
      const v = Number(inp.value);
      return inp.value.trim() !== '' && Number.isFinite(v) && ok(v) ? v : `${what} must be ${what === 'Std' ? 'a positive number' : 'a number'}${what === 'Width' || what === 'Height' ? ' (a whole number from 1 to 8192)' : ''}`;
    };
    const side = (v: number) => Number.isInteger(v) && v >= 1 && v <= 8192;
    const values = [
      n(this.width, 'Width', side), n(this.height, 'Height', side), n(this.scale, 'Scale', () => true),
      ...this.mean.map((i) => n(i, 'Mean', () => true)), ...this.std.map((i) => n(i, 'Std', (v) => v > 0)),
    ];
    const bad = values.find((v) => typeof v === 'string');
    if (typeof bad === 'string') return bad;
    const [w, hgt, scale, m0, m1, m2, s0, s1, s2] = values as number[];
    const preprocessing: Preprocessing = {
      width: w, height: hgt, resize: this.resize.value as ResizeMode, channels: this.gray ? this.gray.keep : this.channels.value as 'RGB' | 'BGR',
      layout: this.layout.value as 'NCHW' | 'NHWC', scale, mean: [m0, m1, m2], std: [s0, s1, s2],
    };
    const labelsFile = this.labelsFile.value.trim();
    return labelsFile ? { preprocessing, labelsFile } : { preprocessing };
  }

  /** Enter in a text or number field applies, as a form would (buttons and selects keep their own Enter). */
  private onKey(e: KeyboardEvent): void {
    const t = e.target as HTMLElement | null;
    if (e.key !== 'Enter' || !(t instanceof HTMLInputElement) || t.type === 'checkbox') return;
    e.preventDefault();
    this.apply();
  }

  private apply(): void {
    const s = this.read();
    if (typeof s === 'string') { this.error.textContent = s; return; }
    this.root.close();
    this.actions.apply(s);
  }
}
