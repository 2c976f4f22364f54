/**
 * Many images' trust reports summarised per figure and map kind (mean ± sd, n, min, max), for a
 * folder of test images in CI. Undefined figures (null) are left out and counted as skipped.
 */
import { summarize, Summary } from '../metrics/summarize';
import { TrustMapKind, TrustReport } from './report';

type PerKindSummary = Partial<Record<TrustMapKind, Summary>>;

export interface TrustSummary {
  images: number;
  sanity?: {
    cascade: { randomized: string[]; spearman: PerKindSummary; spearman_abs: PerKindSummary; ssim: PerKindSummary; hog: PerKindSummary }[];
    independent: { randomized: string[]; spearman: PerKindSummary; spearman_abs: PerKindSummary; ssim: PerKindSummary; hog: PerKindSummary }[];
  };
  faithfulness?: {
    deletion_auc: PerKindSummary;
    insertion_auc: PerKindSummary;
    random_pixels: { deletion_auc: Summary; insertion_auc: Summary };
    random_layer_grid: { deletion_auc: Summary; insertion_auc: Summary };
  };
  truth?: Record<'nss' | 'cc' | 'auc_judd' | 'sim' | 'energy_in_mask' | 'pointing_hit' | 'mask_fraction', PerKindSummary | Summary>;
  robustness?: { perturbation: 'blur' | 'noise'; strength: number; spearman: PerKindSummary; p_fact: Summary }[];
}

const val = (v: number | null | undefined): number => (v === null || v === undefined ? NaN : v);

function perKind(kinds: readonly TrustMapKind[], pick: (k: TrustMapKind) => number[]): PerKindSummary {
  const out: PerKindSummary = {};
  for (const k of kinds) out[k] = summarize(pick(k));
  return out;
}

export function summarizeReports(reports: TrustReport[]): TrustSummary {
  const kinds = [...new Set(reports.flatMap((r) => r.kinds))];
  const out: TrustSummary = { images: reports.length };
  const withSanity = reports.filter((r) => r.sanity);
  if (withSanity.length) {
    const steps = (which: 'cascade' | 'independent') => withSanity[0].sanity![which].map((first, i) => {
      const at = withSanity.map((r) => r.sanity![which][i]).filter((s) => s && s.randomized.join() === first.randomized.join());
      const m = (measure: 'spearman' | 'spearman_abs' | 'ssim' | 'hog') => perKind(kinds, (k) => at.map((s) => val(s[measure][k])));
      return { randomized: first.randomized, spearman: m('spearman'), spearman_abs: m('spearman_abs'), ssim: m('ssim'), hog: m('hog') };
    });
    out.sanity = { cascade: steps('cascade'), independent: steps('independent') };
  }
  const withF = reports.filter((r) => r.faithfulness);
  if (withF.length) {
    const f = withF.map((r) => r.faithfulness!);
    out.faithfulness = {
      deletion_auc: perKind(kinds, (k) => f.map((x) => val(x.maps[k]?.deletion.auc))),
      insertion_auc: perKind(kinds, (k) => f.map((x) => val(x.maps[k]?.insertion.auc))),
      random_pixels: { deletion_auc: summarize(f.map((x) => x.random.pixels.deletion.auc)), insertion_auc: summarize(f.map((x) => x.random.pixels.insertion.auc)) },
      random_layer_grid: { deletion_auc: summarize(f.map((x) => x.random.layer_grid.deletion.auc)), insertion_auc: summarize(f.map((x) => x.random.layer_grid.insertion.auc)) },
    };
  }
  const withT = reports.filter((r) => r.truth);
  if (withT.length) {
    const t = withT.map((r) => r.truth!);
    const m = (key: 'nss' | 'cc' | 'auc_judd' | 'sim' | 'energy_in_mask') => perKind(kinds, (k) => t.map((x) => val(x.maps[k]?.[key])));
    out.truth = {
      nss: m('nss'), cc: m('cc'), auc_judd: m('auc_judd'), sim: m('sim'), energy_in_mask: m('energy_in_mask'),
      pointing_hit: perKind(kinds, (k) => t.map((x) => (x.maps[k] ? Number(x.maps[k]!.pointing_hit) : NaN))),
      mask_fraction: summarize(t.map((x) => x.mask_fraction)),
    };
  }
  const withR = reports.filter((r) => r.robustness);
  if (withR.length) {
    out.robustness = withR[0].robustness!.steps.map((first, i) => {
      const at = withR.map((r) => r.robustness!.steps[i]).filter((s) => s && s.perturbation === first.perturbation && s.strength === first.strength);
      return { perturbation: first.perturbation, strength: first.strength, spearman: perKind(kinds, (k) => at.map((s) => val(s.drift[k]?.spearman))), p_fact: summarize(at.map((s) => s.p_fact)) };
    });
  }
  return out;
}

/** JSON-safe summary: NaN fields (no value, or one value's sd) become null. */
export function summaryJson(s: TrustSummary): unknown {
  return JSON.parse(JSON.stringify(s, (_k, v) => (typeof v === 'number' && !Number.isFinite(v) ? null : v)));
}
