/**
 * The trust report's charts as DOM nodes: the shared SVG tree (core/trust/chart) built with
 * createElementNS, so nothing goes through HTML strings; colours come from panel.css classes
 * that read the editor theme.
 */
import { lineChart, LineChartSpec, SvgNode } from '../../core/trust/chart';

const SVG_NS = 'http://www.w3.org/2000/svg';

export function svgElement(n: SvgNode): SVGElement {
  const el = document.createElementNS(SVG_NS, n.tag);
  for (const [k, v] of Object.entries(n.attrs)) if (k !== 'xmlns') el.setAttribute(k, String(v));
  for (const c of n.children ?? []) el.append(typeof c === 'string' ? document.createTextNode(c) : svgElement(c));
  return el;
}

/** A chart that scales down with its column (viewBox kept, fixed width dropped). */
export function chartElement(spec: LineChartSpec): SVGElement {
  const el = svgElement(lineChart(spec));
  el.removeAttribute('width');
  el.removeAttribute('height');
  return el;
}
