/** The key list (opened with ?), drawn from the same table that dispatches the keys. */
import { h } from '../dom';
import { KEY_BINDINGS, keyLabel } from '../key-bindings';

export function buildKeyLegend(): HTMLDialogElement {
  const rows = KEY_BINDINGS.map((b) => h('tr', {}, [
    h('th', { attrs: { scope: 'row' } }, [h('kbd', { text: keyLabel(b) })]),
    h('td', { text: b.description }),
  ]));
  const dialog: HTMLDialogElement = h('dialog', { class: 'ff-keys', attrs: { 'aria-label': 'Keyboard' } }, [
    h('header', { class: 'ff-drawer-head' }, [
      h('h2', { class: 'ff-h2', text: 'Keyboard' }),
      h('button', { class: 'ff-button ff-button-quiet', text: '×', attrs: { type: 'button', 'aria-label': 'Close' }, on: { click: () => dialog.close() } }),
    ]),
    h('table', { class: 'ff-keys-table' }, [h('tbody', {}, rows)]),
    h('p', { class: 'ff-hint', text: 'Keys work when focus is not in a text field. In the pin tray: Enter opens a pin, Delete removes it.' }),
  ]);
  return dialog;
}
