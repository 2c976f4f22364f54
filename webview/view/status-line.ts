/** One line under the question: progress with Cancel, an error with its hint, or a short notice. */
import { clear, h } from '../dom';

export type Status =
  | { kind: 'idle' }
  | { kind: 'progress'; message: string; fraction?: number; onCancel: () => void }
  | { kind: 'error'; message: string; hint?: string }
  | { kind: 'info'; message: string; action?: { label: string; run: () => void } };

export class StatusLine {
  readonly root: HTMLElement;
  status: Status = { kind: 'idle' };

  constructor() {
    this.root = h('div', { class: 'ff-status', attrs: { id: 'ff-status', role: 'status', 'aria-live': 'polite', 'data-kind': 'idle' } });
  }

  show(s: Status): void {
    this.status = s;
    const r = this.root;
    clear(r);
    // Idle keeps the row's space (CSS hides it), so the layout does not jump when progress appears.
    r.dataset.kind = s.kind;
    if (s.kind === 'progress') {
      const bar = h('progress', { class: 'ff-progress', attrs: { max: 1, 'aria-label': s.message } });
      if (s.fraction !== undefined) bar.value = s.fraction;
      r.append(h('span', { class: 'ff-status-text', text: s.message }), bar,
        h('button', { class: 'ff-button ff-button-small ff-button-secondary', text: 'Cancel', attrs: { type: 'button', 'data-action': 'cancel' }, on: { click: s.onCancel } }));
    } else if (s.kind === 'error') {
      r.append(h('span', { class: 'ff-status-icon', text: '✖', attrs: { 'aria-hidden': 'true' } }),
        h('span', { class: 'ff-status-text', text: s.message }),
        s.hint ? h('span', { class: 'ff-status-hint', text: s.hint }) : '');
    } else if (s.kind === 'info') {
      r.append(h('span', { class: 'ff-status-icon', text: '✓', attrs: { 'aria-hidden': 'true' } }), h('span', { class: 'ff-status-text', text: s.message }),
        s.action ? h('button', { class: 'ff-button ff-button-small ff-button-secondary', text: s.action.label, attrs: { type: 'button', 'data-action': 'status' }, on: { click: s.action.run } }) : '');
    }
  }
}
