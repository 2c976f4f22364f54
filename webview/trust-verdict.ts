/**
 * A verdict per trust check, with the rule it applied stated in words, so the trust view never
 * shows bare numbers. Pure functions over the report; the thresholds are rules of thumb.
 */
import type { TrustMapKind, TrustReport } from './protocol';

export type Verdict = 'passed' | 'doubtful' | 'failed';

export interface CheckVerdict {
  verdict: Verdict;
  /** One line per map kind: what it scored against the rule. */
  lines: string[];
  /** The rule, in words, with where its numbers come from. */
  rule: string;
}

/** Margin a map must beat the random ordering by (area units). Common practice, no source. */
export const FAITHFULNESS_MARGIN = 0.05;
/** Rank correlation with the trained model's map after randomization: below = changed. Common practice, no source. */
export const SANITY_CHANGED = 0.5;
/** Above this the map barely changed when the weights were destroyed. Common practice, no source. */
export const SANITY_UNCHANGED = 0.8;
/** Rank correlation with the unperturbed map at the mildest perturbation: above = stable. Common practice, no source. */
export const ROBUST_STABLE = 0.7;
export const ROBUST_UNSTABLE = 0.4;

const f2 = (v: number | null | undefined): string => (v === null || v === undefined || !Number.isFinite(v) ? '—' : v.toFixed(2));

/** The worst verdict wins: one failing map makes the check doubtful for the set, all failing makes it fail. */
function combine(per: Verdict[]): Verdict {
  if (per.length === 0) return 'doubtful';
  if (per.every((v) => v === 'passed')) return 'passed';
  if (per.every((v) => v === 'failed')) return 'failed';
  return 'doubtful';
}

/**
 * Deletion area must be below the random ordering's by a margin, insertion area above it
 * (the deletion/insertion metric: lower deletion area and higher insertion area mean the map's
 * order found the pixels the prediction rests on; a random order is the floor to beat).
 */
export function faithfulnessVerdict(r: TrustReport): CheckVerdict | undefined {
  const f = r.faithfulness;
  if (!f) return undefined;
  const m = FAITHFULNESS_MARGIN;
  const per: Verdict[] = [];
  const lines: string[] = [];
  for (const k of r.kinds) {
    const x = f.maps[k];
    if (!x) continue;
    // The matched baseline: smooth random orders for layer-resolution maps, per-pixel ones for input-resolution maps (DESIGN §4.3.4).
    const b = f.random[x.baseline];
    const name = x.baseline === 'layer_grid' ? 'random (grid)' : 'random';
    const del = b.deletion.auc - x.deletion.auc; // positive = better than random
    const ins = x.insertion.auc - b.insertion.auc;
    // Beating the smooth baseline but not the per-pixel one is still worth a doubt.
    const px = x.baseline === 'layer_grid' ? f.random.pixels : undefined;
    const worseThanPixels = px !== undefined && x.deletion.auc >= px.deletion.auc;
    const v: Verdict = del <= 0 ? 'failed' : del >= m && ins >= m && !worseThanPixels ? 'passed' : 'doubtful';
    per.push(v);
    const cmp = del <= 0 ? 'worse than random' : del >= m ? 'better than random' : 'barely better than random';
    const pxNote = worseThanPixels ? `; deletion not below the per-pixel random order's ${f2(px!.deletion.auc)}` : '';
    lines.push(`${k}: ${v} — deletion ${f2(x.deletion.auc)} vs ${name} ${f2(b.deletion.auc)} (${cmp}), insertion ${f2(x.insertion.auc)} vs ${name} ${f2(b.insertion.auc)}${pxNote}`);
  }
  return {
    verdict: combine(per), lines,
    rule: `Passed when the deletion area is at least ${m} below the random order's and the insertion area at least ${m} above it (layer maps against smooth random orders on the layer grid, which they must also not lose to per pixel); failed when deletion is not below random (margin: common practice, no source).`,
  };
}

/**
 * After the whole cascade of weight randomization the map must no longer match the trained
 * model's map (rank correlation falls), else it shows the image rather than the model.
 */
export function sanityVerdict(r: TrustReport): CheckVerdict | undefined {
  const s = r.sanity;
  const last = s?.cascade[s.cascade.length - 1];
  if (!s || !last) return undefined;
  const per: Verdict[] = [];
  const lines: string[] = [];
  for (const k of r.kinds) {
    if (last.flat.includes(k)) { per.push('passed'); lines.push(`${k}: passed — the map went flat (changed completely)`); continue; }
    const rho = last.spearman[k];
    if (rho === null || rho === undefined || !Number.isFinite(rho)) continue;
    const a = Math.abs(rho);
    const v: Verdict = a < SANITY_CHANGED ? 'passed' : a >= SANITY_UNCHANGED ? 'failed' : 'doubtful';
    per.push(v);
    lines.push(`${k}: ${v} — rank correlation with the trained model's map ${f2(rho)} after randomizing all ${s.cascade.length} blocks`);
  }
  return {
    verdict: combine(per), lines,
    rule: `Passed when the rank correlation (absolute value) drops below ${SANITY_CHANGED} once all weights are random; failed when it stays at ${SANITY_UNCHANGED} or above (thresholds: common practice, no source).`,
  };
}

/** The map should favour the marked object: NSS above 0 and AUC-Judd above 0.5 (chance is 0 and 0.5 by their definitions). */
export function truthVerdict(r: TrustReport, kinds: readonly TrustMapKind[] = r.kinds): CheckVerdict | undefined {
  const t = r.truth;
  if (!t) return undefined;
  const per: Verdict[] = [];
  const lines: string[] = [];
  for (const k of kinds) {
    const x = t.maps[k];
    if (!x || x.nss === null || x.auc_judd === null) continue;
    const v: Verdict = x.nss > 0 && x.auc_judd > 0.5 ? 'passed' : x.nss <= 0 && x.auc_judd <= 0.5 ? 'failed' : 'doubtful';
    per.push(v);
    lines.push(`${k}: ${v} — NSS ${f2(x.nss)}, AUC-Judd ${f2(x.auc_judd)}${x.pointing_hit ? ', peak on it' : ', peak off it'}`);
  }
  return {
    verdict: combine(per), lines,
    rule: 'Passed when NSS > 0 and AUC-Judd > 0.5 (chance level is NSS 0 and AUC 0.5 by their definitions); failed when both are at or below chance.',
  };
}

/** At the mildest blur and noise the map should stay close to the unperturbed one. */
export function robustnessVerdict(r: TrustReport): CheckVerdict | undefined {
  const steps = r.robustness?.steps ?? [];
  if (steps.length === 0) return undefined;
  const mildest = (['blur', 'noise'] as const).map((p) => steps.filter((s) => s.perturbation === p).sort((a, b) => a.strength - b.strength)[0]).filter((s) => !!s);
  const per: Verdict[] = [];
  const lines: string[] = [];
  for (const k of r.kinds) {
    const rhos = mildest.map((s) => s.drift[k]?.spearman).filter((v): v is number => typeof v === 'number' && Number.isFinite(v));
    if (rhos.length === 0) continue;
    const worst = Math.min(...rhos);
    const v: Verdict = worst >= ROBUST_STABLE ? 'passed' : worst < ROBUST_UNSTABLE ? 'failed' : 'doubtful';
    per.push(v);
    lines.push(`${k}: ${v} — lowest rank correlation at the mildest blur and noise ${f2(worst)}`);
  }
  return {
    verdict: combine(per), lines,
    rule: `Passed when the map keeps a rank correlation of at least ${ROBUST_STABLE} with itself at the mildest blur and noise; failed below ${ROBUST_UNSTABLE} (thresholds: common practice, no source).`,
  };
}

export const VERDICT_WORDS: Record<Verdict, string> = { passed: 'Passed', doubtful: 'Doubtful', failed: 'Failed' };
