/**
 * A small element builder. Everything is created through the DOM API (no HTML strings, no inline
 * handlers, no style attributes), so the panel runs under a strict Content-Security-Policy.
 */
type Child = Node | string | undefined | null | false;

export interface Props {
  class?: string;
  text?: string;
  attrs?: Record<string, string | number | boolean | undefined>;
  on?: { [K in keyof HTMLElementEventMap]?: (e: HTMLElementEventMap[K]) => void };
}

export function h<K extends keyof HTMLElementTagNameMap>(tag: K, props: Props = {}, children: Child[] = []): HTMLElementTagNameMap[K] {
  const el = document.createElement(tag);
  if (props.class) el.className = props.class;
  if (props.text !== undefined) el.textContent = props.text;
  if (props.attrs) setAttrs(el, props.attrs);
  if (props.on) {
    for (const [name, fn] of Object.entries(props.on)) el.addEventListener(name, fn as EventListener);
  }
  for (const c of children) if (c !== undefined && c !== null && c !== false) el.append(c);
  return el;
}

export function setAttrs(el: Element, attrs: Record<string, string | number | boolean | undefined>): void {
  for (const [k, v] of Object.entries(attrs)) {
    if (v === undefined || v === false) el.removeAttribute(k);
    else el.setAttribute(k, v === true ? '' : String(v));
  }
}

export function clear(el: Element): void {
  while (el.firstChild) el.firstChild.remove();
}

let counter = 0;
/** A unique element id (for aria-controls, label for=…). */
export function uid(prefix: string): string {
  counter += 1;
  return `${prefix}-${counter}`;
}
