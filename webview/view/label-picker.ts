/**
 * A class picker with type-to-search (ARIA combobox + listbox). Shows the current label when idle;
 * typing filters labels (prefix matches first, then rank by probability); ↑/↓ move, Enter picks,
 * Escape puts the old choice back.
 */
import { searchLabels } from '../class-order';
import { h, setAttrs, clear, uid } from '../dom';

export interface PickerSource {
  labels: readonly string[];
  ranked: readonly number[];
  probability(index: number): number | undefined;
}

export class LabelPicker {
  readonly root: HTMLElement;
  readonly input: HTMLInputElement;
  private readonly list: HTMLUListElement;
  private options: number[] = [];
  private active = -1;
  private current = 0;
  /** A class this picker may not take (the foil picker's fact): listed, marked, never picked. */
  private excluded?: number;
  private source: PickerSource = { labels: [], ranked: [], probability: () => undefined };

  constructor(caption: string, private readonly onPick: (index: number) => void, cssClass: string, inputId = uid('ff-pick')) {
    const listId = uid('ff-list');
    this.input = h('input', {
      class: 'ff-picker-input',
      attrs: {
        id: inputId, type: 'text', role: 'combobox', 'aria-autocomplete': 'list', 'aria-expanded': 'false',
        'aria-controls': listId, autocomplete: 'off', spellcheck: 'false',
      },
      on: {
        focus: () => { this.input.select(); this.open(); },
        input: () => this.filter(),
        keydown: (e) => this.onKey(e),
        blur: () => this.close(true),
      },
    });
    this.list = h('ul', { class: 'ff-picker-list', attrs: { id: listId, role: 'listbox', 'aria-label': `${caption} classes` } });
    this.list.hidden = true;
    this.root = h('div', { class: `ff-picker ${cssClass}` }, [
      h('label', { class: 'ff-picker-caption', text: caption, attrs: { for: inputId } }),
      this.input,
      this.list,
    ]);
  }

  update(source: PickerSource, current: number, enabled: boolean, excluded?: number): void {
    this.source = source;
    this.current = current;
    this.excluded = excluded;
    this.input.disabled = !enabled;
    if (document.activeElement !== this.input) this.input.value = source.labels[current] ?? '';
  }

  focus(): void { this.input.focus(); }

  private open(): void {
    this.filter(true);
  }

  private filter(showAll = false): void {
    const q = showAll ? '' : this.input.value;
    this.options = searchLabels(this.source.labels, this.source.ranked, q);
    this.active = this.options.length ? Math.max(0, showAll ? this.options.indexOf(this.current) : 0) : -1;
    this.renderList();
  }

  private renderList(): void {
    clear(this.list);
    this.options.forEach((idx, i) => {
      const p = this.source.probability(idx);
      const off = idx === this.excluded;
      const li = h('li', {
        class: `ff-picker-option${off ? ' is-excluded' : ''}`,
        attrs: {
          id: `${this.list.id}-${i}`, role: 'option', 'data-class': idx, 'aria-selected': i === this.active ? 'true' : 'false',
          ...(off ? { 'aria-disabled': 'true', title: 'This is the fact class; a foil must differ from it' } : {}),
        },
        on: {
          mousedown: (e) => { e.preventDefault(); this.pick(idx); },
        },
      }, [
        h('span', { class: 'ff-picker-label', text: this.source.labels[idx] }),
        off ? h('span', { class: 'ff-picker-p', text: 'fact' }) : p !== undefined ? h('span', { class: 'ff-picker-p', text: `${(p * 100).toFixed(1)}%` }) : undefined,
      ]);
      this.list.append(li);
    });
    if (this.options.length === 0) this.list.append(h('li', { class: 'ff-picker-empty', text: 'No matching class' }));
    this.list.hidden = false;
    setAttrs(this.input, { 'aria-expanded': 'true', 'aria-activedescendant': this.active >= 0 ? `${this.list.id}-${this.active}` : undefined });
    this.list.children[this.active]?.scrollIntoView({ block: 'nearest' });
  }

  private onKey(e: KeyboardEvent): void {
    if (e.key === 'ArrowDown' || e.key === 'ArrowUp') {
      e.preventDefault();
      if (this.list.hidden) { this.open(); return; }
      const n = this.options.length;
      if (n) { this.active = (this.active + (e.key === 'ArrowDown' ? 1 : -1) + n) % n; this.renderList(); }
    } else if (e.key === 'Enter') {
      e.preventDefault();
      if (this.active >= 0) this.pick(this.options[this.active]);
    } else if (e.key === 'Escape') {
      e.preventDefault();
      e.stopPropagation();
      this.input.blur();
    }
  }

  private pick(index: number): void {
    if (index === this.excluded) {
      // Refused, and the input goes back to the current choice so what is shown matches the question.
      this.input.blur();
      return;
    }
    this.current = index;
    this.input.value = this.source.labels[index] ?? '';
    this.input.blur();
    this.onPick(index);
  }

  private close(revert: boolean): void {
    this.list.hidden = true;
    setAttrs(this.input, { 'aria-expanded': 'false', 'aria-activedescendant': undefined });
    if (revert) this.input.value = this.source.labels[this.current] ?? '';
  }
}
