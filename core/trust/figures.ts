/**
 * The report's charts, each with its one-line plain explanation: deletion and insertion curves,
 * the randomization cascade, and map drift under blur and noise. Shared by the CLI's PNG report
 * and the panel; imports only import-free modules.
 */
import { LineChartSpec, Series } from './chart';
import { TRUST_MAP_KINDS, TrustMapKind, TrustReport } from './report';

export const KIND_NAMES: Record<TrustMapKind, string> = {
  evidence: 'evidence', contrast: 'contrast', detail: 'detail', 'guided-evidence': 'guided-evidence', gradient: 'gradient',
};

/** Colour slot of a kind: its place in TRUST_MAP_KINDS. */
export const slotOf = (k: TrustMapKind): number => TRUST_MAP_KINDS.indexOf(k);

export const EXPLAIN = {
  deletion: 'Most salient pixels removed first: the faster the fact\'s probability falls, the more the map found what the model used (lower area is better).',
  insertion: 'Most salient pixels put back first into a blurred copy: the faster the probability rises, the better (higher area is better).',
  cascade: 'Weights replaced by random ones, from the scores down: a map that explains the model must change (fall towards 0); one that stays high shows the image, not the model.',
  independent: 'One block randomized at a time: a faithful map changes whichever block is destroyed.',
  blur: 'The same map on a blurred input: values near 1 mean the map is stable under small changes the prediction survives.',
  noise: 'The same map with noise added to the input (σ as a share of the input\'s spread).',
  truth: 'Scores against the region you marked: NSS > 0 and AUC > 0.5 mean the map favours the region; pointing asks whether its peak lies on it.',
  caution: 'A map explains the model, not the world: it shows what this network used, which may be a shortcut rather than the object. Validate before relying on it in safety-critical use.',
} as const;

const UNIT_TICKS = [0, 0.25, 0.5, 0.75, 1];
const percentTicks = { min: 0, max: 1, ticks: [0, 0.25, 0.5, 0.75, 1].map((at) => ({ at, label: `${Math.round(at * 100)}%` })) };
const fmt = (v: number): string => v.toFixed(2);

/** Deletion and insertion: one line per map kind, the matching random baselines dashed. */
export function faithfulnessCharts(r: TrustReport): LineChartSpec[] {
  const f = r.faithfulness;
  if (!f) return [];
  const make = (which: 'deletion' | 'insertion'): LineChartSpec => {
    const series: Series[] = [];
    for (const k of r.kinds) {
      const c = f.maps[k]?.[which];
      if (c) series.push({ name: `${KIND_NAMES[k]} ${fmt(c.auc)}`, slot: slotOf(k), points: c.x.map((x, i) => [x, c.y[i]]) });
    }
    const used = new Set(Object.values(f.maps).map((m) => m!.baseline));
    for (const b of ['layer_grid', 'pixels'] as const) {
      if (!used.has(b)) continue;
      const c = f.random[b][which];
      series.push({ name: `random${b === 'layer_grid' ? ' (grid)' : ''} ${fmt(c.auc)}`, slot: 'base', dashed: b === 'pixels', points: c.x.map((x, i) => [x, c.y[i]]) });
    }
    return {
      title: which === 'deletion' ? 'Deletion' : 'Insertion', caption: which === 'deletion' ? 'lower area is better' : 'higher area is better',
      xLabel: which === 'deletion' ? 'pixels removed' : 'pixels restored', yLabel: 'p(fact)', x: percentTicks, y: { min: 0, max: 1, ticks: UNIT_TICKS }, series,
    };
  };
  return [make('deletion'), make('insertion')];
}

/** Spearman rank correlation with the original map after each cascade step (the trained model first, at 1). */
export function cascadeChart(r: TrustReport, measure: 'spearman' | 'spearman_abs' | 'ssim' | 'hog' = 'spearman', which: 'cascade' | 'independent' = 'cascade'): LineChartSpec | undefined {
  const s = r.sanity;
  const steps = s?.[which];
  if (!s || !steps?.length) return undefined;
  const cascade = which === 'cascade';
  const labels = [...(cascade ? ['trained'] : []), ...steps.map((st, i) => (cascade ? (i === 0 ? st.randomized[0] : `+${st.randomized.at(-1)}`) : st.randomized[0]))];
  const offset = cascade ? 1 : 0;
  const series: Series[] = r.kinds.map((k) => ({
    name: KIND_NAMES[k], slot: slotOf(k),
    points: [...(cascade ? [[0, 1] as [number, number]] : []), ...steps.map((st, i) => [i + offset, flatAsZero(st[measure][k], st.flat.includes(k))] as [number, number])],
  }));
  const min = Math.min(0, ...series.flatMap((x) => x.points.map((p) => p[1])).filter(Number.isFinite));
  return {
    title: cascade ? 'Randomization cascade' : 'One block randomized', caption: `${{ spearman: 'Spearman', spearman_abs: 'Spearman of |map|', ssim: 'SSIM', hog: 'HOG Pearson' }[measure]} with the trained model's map`,
    xLabel: cascade ? 'weights randomized, from the scores down' : 'block randomized', yLabel: measure === 'hog' ? 'HOG r' : measure === 'ssim' ? 'SSIM' : 'rank corr.',
    x: { min: 0, max: Math.max(1, labels.length - 1), ticks: labels.map((label, at) => ({ at, label: label.length > 9 ? label.slice(0, 8) + '…' : label })) },
    y: { min: min < -0.01 ? -1 : 0, max: 1, ticks: min < -0.01 ? [-1, -0.5, 0, 0.5, 1] : UNIT_TICKS }, series, width: 420,
  };
}

/** A map that went flat kept none of the original's structure: drawn at 0 (its correlation is undefined). */
function flatAsZero(v: number | null | undefined, flat: boolean): number {
  return v ?? (flat ? 0 : NaN);
}

/** Spearman of the perturbed map with the clean one, against blur σ and noise σ. */
export function driftCharts(r: TrustReport): LineChartSpec[] {
  const steps = r.robustness?.steps;
  if (!steps?.length) return [];
  const make = (p: 'blur' | 'noise'): LineChartSpec | undefined => {
    const st = steps.filter((s) => s.perturbation === p);
    if (!st.length) return undefined;
    const max = Math.max(...st.map((s) => s.strength));
    const series: Series[] = r.kinds.map((k) => ({ name: KIND_NAMES[k], slot: slotOf(k), points: [[0, 1] as [number, number], ...st.map((s) => [s.strength, s.drift[k]?.spearman ?? NaN] as [number, number])] }));
    series.push({ name: 'p(fact)', slot: 'base', dashed: true, points: [[0, r.p_fact], ...st.map((s) => [s.strength, s.p_fact] as [number, number])] });
    const negative = series.some((x) => x.points.some((q) => q[1] < -0.01));
    return {
      title: p === 'blur' ? 'Under blur' : 'Under noise', caption: 'rank corr. with the clean map',
      xLabel: p === 'blur' ? 'blur σ (input px)' : 'noise σ (× input sd)', yLabel: 'Spearman',
      x: { min: 0, max, ticks: [0, ...st.map((s) => s.strength)].map((at) => ({ at, label: String(at) })) },
      y: negative ? { min: -1, max: 1, ticks: [-1, -0.5, 0, 0.5, 1] } : { min: 0, max: 1, ticks: UNIT_TICKS }, series,
    };
  };
  return [make('blur'), make('noise')].filter((c): c is LineChartSpec => !!c);
}

/**
 * Standalone style for chart PNGs (white background): our own set, one colour per map kind in
 * TRUST_MAP_KINDS order, every pair at least 106 apart in RGB and each at least 4.2:1 against
 * white (WCAG 2.1's 3:1 for graphics); guided-evidence dashed and gradient dotted so contrast and
 * gradient differ without colour; baselines grey. The panel's light theme uses the same values
 * (webview/panel.css).
 */
export const CHART_PNG_STYLE = `
.ff-chart-title{font:600 12px sans-serif;fill:#1a1a1a}.ff-chart-caption{font:10px sans-serif;fill:#555}
.ff-chart-tick,.ff-chart-legend{font:10px sans-serif;fill:#333}.ff-chart-label{font:10px sans-serif;fill:#444}
.ff-chart-axis{stroke:#666;stroke-width:1}.ff-chart-grid{stroke:#ddd;stroke-width:1}
.ff-chart-line{fill:none;stroke-width:1.8}.ff-chart-dashed{stroke-dasharray:4 3}
.ff-series-0{stroke:#2f62c4;fill:#2f62c4}.ff-series-1{stroke:#d42a2a;fill:#d42a2a}.ff-series-2{stroke:#1f8a3c;fill:#1f8a3c}
.ff-series-3{stroke:#b22fa8;fill:#b22fa8}.ff-series-4{stroke:#8f7a00;fill:#8f7a00}.ff-series-base{stroke:#777;fill:#777}
.ff-chart-line.ff-series-3{stroke-dasharray:7 3}.ff-chart-line.ff-series-4{stroke-dasharray:1.5 2.5;stroke-linecap:round}
polyline.ff-chart-line{fill:none}`;

/** The chart files a saved report carries, by name, each a row of charts: the CLI and the panel save the same set. */
export type SavedChartName = 'faithfulness' | 'sanity' | 'robustness';
export function savedChartSets(r: TrustReport): [SavedChartName, LineChartSpec[]][] {
  const out: [SavedChartName, LineChartSpec[]][] = [];
  const f = faithfulnessCharts(r);
  if (f.length) out.push(['faithfulness', f]);
  const c = [cascadeChart(r), cascadeChart(r, 'spearman', 'independent')].filter((x): x is LineChartSpec => !!x);
  if (c.length) out.push(['sanity', c]);
  const d = driftCharts(r);
  if (d.length) out.push(['robustness', d]);
  return out;
}
