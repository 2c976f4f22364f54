/** Which classes to explain by default and in which order to step through them (DESIGN §2). */
import type { Prediction } from './protocol';

/**
 * Fact: the top-1 prediction. Foil: the expected label when the image is misclassified,
 * otherwise the runner-up.
 */
export function defaultFactFoil(prediction: readonly Prediction[], labelCount: number, expected?: number): { fact: number; foil: number } {
  const fact = prediction[0]?.index ?? 0;
  if (expected !== undefined && expected !== fact) return { fact, foil: expected };
  const runnerUp = prediction.find((p) => p.index !== fact)?.index;
  return { fact, foil: runnerUp ?? (fact + 1) % Math.max(labelCount, 1) };
}

/**
 * Fact and foil after the prediction changed (new preprocessing or labels): a class the user
 * picked stays while it still exists, the other follows the new defaults; when the two meet, the
 * one not picked moves to the most probable other class.
 */
export function keptFactFoil(current: { fact: number; foil: number }, picked: { fact: boolean; foil: boolean },
  prediction: readonly Prediction[], labelCount: number, expected?: number): { fact: number; foil: number } {
  const d = defaultFactFoil(prediction, labelCount, expected);
  const keep = (which: 'fact' | 'foil') => picked[which] && current[which] < labelCount;
  const fact = keep('fact') ? current.fact : d.fact;
  const foil = keep('foil') ? current.foil : d.foil;
  if (fact !== foil || labelCount < 2) return { fact, foil };
  const other = (of: number) => rankedClasses(prediction, labelCount).find((i) => i !== of)!;
  return keep('fact') ? { fact, foil: other(fact) } : { fact: other(foil), foil };
}

/** All class indices, ranked by probability first, then the unranked rest in label order. */
export function rankedClasses(prediction: readonly Prediction[], labelCount: number): number[] {
  const seen = new Set<number>();
  const out: number[] = [];
  for (const p of [...prediction].sort((a, b) => b.p - a.p)) if (!seen.has(p.index)) { seen.add(p.index); out.push(p.index); }
  for (let i = 0; i < labelCount; i++) if (!seen.has(i)) out.push(i);
  return out;
}

/** The next class in rank order from `current` (wrapping), skipping `skip` (the fact when stepping foils). */
export function stepClass(ranked: readonly number[], current: number, delta: 1 | -1, skip?: number): number {
  const n = ranked.length;
  if (n === 0) return current;
  let i = ranked.indexOf(current);
  if (i < 0) i = delta > 0 ? -1 : 0;
  for (let tries = 0; tries < n; tries++) {
    i = (i + delta + n) % n;
    if (ranked[i] !== skip) return ranked[i];
  }
  return current;
}

/** Labels matching a search, in rank order: prefix matches first, then substring matches. */
export function searchLabels(labels: readonly string[], ranked: readonly number[], query: string, limit = 50): number[] {
  const q = query.trim().toLowerCase();
  if (!q) return ranked.slice(0, limit);
  const prefix: number[] = [], inside: number[] = [];
  for (const i of ranked) {
    const l = labels[i].toLowerCase();
    if (l.startsWith(q)) prefix.push(i); else if (l.includes(q)) inside.push(i);
  }
  return [...prefix, ...inside].slice(0, limit);
}
