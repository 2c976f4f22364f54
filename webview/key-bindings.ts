/**
 * The panel's keyboard map: one table, used both to dispatch keys and to draw the key legend.
 * Keys are read only when focus is not in a text field or list (those keep their own keys).
 */
import { MAP_KINDS, MapKind } from './protocol';

export type PanelCommand =
  | 'layer-shallower' | 'layer-deeper' | 'foil-prev' | 'foil-next' | 'fact-prev' | 'fact-next'
  | `kind:${MapKind}` | 'variant-next' | 'pin' | 'save' | 'toggle-shared-scale' | 'colormap-next'
  | 'opacity-down' | 'opacity-up' | 'toggle-map' | 'focus-fact' | 'focus-foil' | 'settings' | 'help' | 'escape';

export interface KeyBinding { keys: string[]; shift?: boolean; command: PanelCommand; description: string }

export const KEY_BINDINGS: readonly KeyBinding[] = [
  { keys: ['ArrowUp', '['], command: 'layer-shallower', description: 'Shallower layer' },
  { keys: ['ArrowDown', ']'], command: 'layer-deeper', description: 'Deeper layer' },
  { keys: ['ArrowLeft'], command: 'foil-prev', description: 'Previous foil by probability (views without a foil: the fact)' },
  { keys: ['ArrowRight'], command: 'foil-next', description: 'Next foil by probability (views without a foil: the fact)' },
  { keys: ['ArrowLeft'], shift: true, command: 'fact-prev', description: 'Previous fact by probability' },
  { keys: ['ArrowRight'], shift: true, command: 'fact-next', description: 'Next fact by probability' },
  ...MAP_KINDS.map((k, i): KeyBinding => ({ keys: [String(i + 1)], command: `kind:${k}`, description: `Map: ${k}` })),
  { keys: ['v'], command: 'variant-next', description: 'Next variant (contrast, mismatch)' },
  { keys: ['f'], command: 'focus-fact', description: 'Search the fact class' },
  { keys: ['n'], command: 'focus-foil', description: 'Search the foil class ("not …")' },
  { keys: ['p'], command: 'pin', description: 'Pin the current map to the tray' },
  { keys: ['u'], command: 'toggle-shared-scale', description: 'Tray: one shared scale / a scale per map' },
  { keys: ['s'], command: 'save', description: 'Save the current map beside the image' },
  { keys: ['c'], command: 'colormap-next', description: 'Next colormap' },
  { keys: ['-'], command: 'opacity-down', description: 'Map opacity down' },
  { keys: ['=', '+'], command: 'opacity-up', description: 'Map opacity up' },
  { keys: ['m'], command: 'toggle-map', description: 'Hide / show the map' },
  { keys: [','], command: 'settings', description: 'Preprocessing and labels' },
  { keys: ['?'], command: 'help', description: 'This key list' },
  { keys: ['Escape'], command: 'escape', description: 'Close a dialog, or cancel the running request' },
];

export interface KeyLike { key: string; shiftKey: boolean; ctrlKey: boolean; metaKey: boolean; altKey: boolean }

/** The command for a key press, or undefined. Modified keys (Ctrl, Cmd, Alt) are left to the editor. */
export function commandForKey(e: KeyLike): PanelCommand | undefined {
  if (e.ctrlKey || e.metaKey || e.altKey) return undefined;
  // Shift matters only for arrows; for printable keys it is already part of e.key ('?', '+').
  const isArrow = e.key.startsWith('Arrow');
  const hit = KEY_BINDINGS.find((b) => b.keys.includes(e.key) && (!isArrow || Boolean(b.shift) === e.shiftKey));
  return hit?.command;
}

/** How a binding's keys read in the legend. */
export function keyLabel(b: KeyBinding): string {
  const glyph: Record<string, string> = { ArrowUp: '↑', ArrowDown: '↓', ArrowLeft: '←', ArrowRight: '→', Escape: 'Esc' };
  return b.keys.map((k) => (b.shift ? 'Shift+' : '') + (glyph[k] ?? k)).join(' / ');
}
