/** The hand-drawn SVG charts: points land where the axes say, text is escaped, the tree serialises to valid SVG. */
import { strict as assert } from 'node:assert';
import sharp from 'sharp';
import { lineChart, svgText, SvgNode } from '../../../core/trust/chart';
import { cascadeChart, faithfulnessCharts } from '../../../core/trust/figures';
import { SAMPLE_REPORT } from '../../webview/trust-protocol.test';

const find = (n: SvgNode, pred: (x: SvgNode) => boolean): SvgNode[] =>
  [...(pred(n) ? [n] : []), ...(n.children ?? []).flatMap((c) => (typeof c === 'string' ? [] : find(c, pred)))];

describe('line charts', () => {
  const spec = {
    title: 'A <b> & "c"', xLabel: 'x', yLabel: 'y', width: 300, height: 200,
    x: { min: 0, max: 1, ticks: [{ at: 0, label: '0' }, { at: 1, label: '1' }] }, y: { min: 0, max: 1, ticks: [0, 1] },
    series: [{ name: 's', slot: 0 as const, points: [[0, 0], [1, 1]] as [number, number][] }],
  };

  it('maps (x.min, y.min) to the bottom-left of the plot box and (x.max, y.max) to its top-right', () => {
    const svg = lineChart(spec);
    const [line] = find(svg, (n) => n.tag === 'polyline');
    const [[x0, y0], [x1, y1]] = String(line.attrs.points).split(' ').map((p) => p.split(',').map(Number));
    assert.ok(x0 < x1 && y0 > y1, String(line.attrs.points));
    const axes = find(svg, (n) => n.tag === 'line' && n.attrs.class === 'ff-chart-axis' && n.attrs.x1 === n.attrs.x2 && n.attrs.y1 !== Number(n.attrs.y2) - 3);
    assert.ok(axes.some((a) => a.attrs.x1 === x0), 'the y axis passes through x.min');
  });

  it('escapes text and renders to an image with sharp', async () => {
    const text = svgText(lineChart(spec), '.ff-chart-line{stroke:#000}');
    assert.match(text, /A &lt;b&gt; &amp; &quot;c&quot;/);
    assert.doesNotMatch(text, /<b>/);
    const meta = await sharp(Buffer.from(text)).metadata();
    assert.deepEqual([meta.width, meta.height], [300, 200]);
  });

  it('draws the report: a line per kind plus the matching random baseline, the cascade from the trained model at 1', () => {
    const [del] = faithfulnessCharts(SAMPLE_REPORT);
    assert.deepEqual(del.series.map((s) => s.name), ['evidence 0.50', 'random (grid) 0.50']);
    const c = cascadeChart(SAMPLE_REPORT)!;
    assert.deepEqual(c.x.ticks.map((t) => t.label), ['trained', 'stage4']);
    // Each kind starts at 1 (the trained model) and ends at its ρ after the step: evidence 0.1, detail 0.9.
    assert.deepEqual(c.series.map((s) => s.points), [[[0, 1], [1, 0.1]], [[0, 1], [1, 0.9]]]);
  });
});
