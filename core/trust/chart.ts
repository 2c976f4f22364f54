/**
 * Small line charts as a plain SVG tree, drawn by hand: the CLI serialises the tree to text
 * and renders it to PNG with sharp; the panel builds DOM nodes from the same tree and colours
 * them from the editor theme through the class names. Imports nothing, so both sides share it.
 */

export interface SvgNode {
  tag: string;
  attrs: Record<string, string | number>;
  children?: (SvgNode | string)[];
}

export interface Series {
  name: string;
  points: [number, number][];
  /** Colour slot: `ff-series-<n>` (a map kind) or `ff-series-base` (a random baseline). */
  slot: number | 'base';
  dashed?: boolean;
}

export interface LineChartSpec {
  title: string;
  /** One plain sentence under the title: how to read the chart. */
  caption?: string;
  xLabel: string;
  yLabel: string;
  x: { min: number; max: number; ticks: { at: number; label: string }[] };
  y: { min: number; max: number; ticks: number[] };
  series: Series[];
  width?: number;
  height?: number;
}

const n = (v: number): number => Math.round(v * 100) / 100;
const node = (tag: string, attrs: SvgNode['attrs'], children?: SvgNode['children']): SvgNode => (children ? { tag, attrs, children } : { tag, attrs });

/** A line chart with axes, ticks, grid lines, one polyline per series and a legend at the right. */
export function lineChart(spec: LineChartSpec): SvgNode {
  const width = spec.width ?? 360;
  const height = spec.height ?? 220;
  const legendWidth = Math.min(130, 16 + 6.5 * Math.max(0, ...spec.series.map((s) => s.name.length)));
  const top = spec.caption ? 40 : 26;
  const box = { left: 42, top, right: width - legendWidth - 8, bottom: height - 34 };
  const sx = (x: number) => box.left + ((x - spec.x.min) / (spec.x.max - spec.x.min || 1)) * (box.right - box.left);
  const sy = (y: number) => box.bottom - ((y - spec.y.min) / (spec.y.max - spec.y.min || 1)) * (box.bottom - box.top);
  const kids: SvgNode[] = [];
  kids.push(node('text', { class: 'ff-chart-title', x: 4, y: 14 }, [spec.title]));
  if (spec.caption) kids.push(node('text', { class: 'ff-chart-caption', x: 4, y: 29 }, [spec.caption]));
  for (const t of spec.y.ticks) {
    kids.push(node('line', { class: 'ff-chart-grid', x1: box.left, x2: box.right, y1: n(sy(t)), y2: n(sy(t)) }));
    kids.push(node('text', { class: 'ff-chart-tick', x: box.left - 4, y: n(sy(t) + 3), 'text-anchor': 'end' }, [String(t)]));
  }
  for (const t of spec.x.ticks) {
    kids.push(node('line', { class: 'ff-chart-axis', x1: n(sx(t.at)), x2: n(sx(t.at)), y1: box.bottom, y2: box.bottom + 3 }));
    kids.push(node('text', { class: 'ff-chart-tick', x: n(sx(t.at)), y: box.bottom + 13, 'text-anchor': 'middle' }, [t.label]));
  }
  kids.push(node('line', { class: 'ff-chart-axis', x1: box.left, x2: box.right, y1: box.bottom, y2: box.bottom }));
  kids.push(node('line', { class: 'ff-chart-axis', x1: box.left, x2: box.left, y1: box.top, y2: box.bottom }));
  kids.push(node('text', { class: 'ff-chart-label', x: n((box.left + box.right) / 2), y: height - 6, 'text-anchor': 'middle' }, [spec.xLabel]));
  kids.push(node('text', { class: 'ff-chart-label', x: 10, y: n((box.top + box.bottom) / 2), 'text-anchor': 'middle', transform: `rotate(-90 10 ${n((box.top + box.bottom) / 2)})` }, [spec.yLabel]));
  spec.series.forEach((s, i) => {
    const cls = `ff-chart-line ff-series-${s.slot}${s.dashed ? ' ff-chart-dashed' : ''}`;
    const pts = s.points.filter(([x, y]) => Number.isFinite(x) && Number.isFinite(y));
    if (pts.length > 1) kids.push(node('polyline', { class: cls, points: pts.map(([x, y]) => `${n(sx(x))},${n(sy(y))}`).join(' '), fill: 'none' }));
    for (const [x, y] of pts.length <= 12 ? pts : []) kids.push(node('circle', { class: `ff-chart-dot ff-series-${s.slot}`, cx: n(sx(x)), cy: n(sy(y)), r: 2.2 }));
    const ly = box.top + 6 + 14 * i;
    kids.push(node('line', { class: cls, x1: box.right + 10, x2: box.right + 24, y1: ly, y2: ly }));
    kids.push(node('text', { class: 'ff-chart-legend', x: box.right + 28, y: ly + 3 }, [s.name]));
  });
  return node('svg', { xmlns: 'http://www.w3.org/2000/svg', class: 'ff-chart', width, height, viewBox: `0 0 ${width} ${height}`, role: 'img', 'aria-label': spec.title }, kids);
}

/** Several charts side by side in one SVG (for a PNG report). */
export function chartRow(charts: SvgNode[], background?: string): SvgNode {
  let x = 0;
  const kids: SvgNode[] = [];
  let height = 0;
  for (const c of charts) {
    const w = Number(c.attrs.width);
    height = Math.max(height, Number(c.attrs.height));
    kids.push(node('g', { transform: `translate(${x} 0)` }, c.children));
    x += w + 12;
  }
  const width = Math.max(1, x - 12);
  const bg = background ? [node('rect', { x: 0, y: 0, width, height, fill: background })] : [];
  return node('svg', { xmlns: 'http://www.w3.org/2000/svg', width, height, viewBox: `0 0 ${width} ${height}` }, [...bg, ...kids]);
}

const escape = (t: string): string => t.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

/** SVG text; `style` (CSS) is embedded first so standalone renderers colour the classes. */
export function svgText(root: SvgNode, style?: string): string {
  const write = (x: SvgNode | string): string => {
    if (typeof x === 'string') return escape(x);
    const attrs = Object.entries(x.attrs).map(([k, v]) => ` ${k}="${escape(String(v))}"`).join('');
    const inner = (x === root && style ? `<style>${style}</style>` : '') + (x.children ?? []).map(write).join('');
    return `<${x.tag}${attrs}>${inner}</${x.tag}>`;
  };
  return write(root);
}
