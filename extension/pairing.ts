/**
 * Which model goes with an image: the pairing image folder → model remembered per workspace,
 * the recently used models, and the order the model quick pick lists the workspace's `.onnx`
 * files in. No vscode import: the store is any get/update pair (workspaceState in the extension).
 */
import * as path from 'node:path';

export interface KeyValueStore {
  get<T>(key: string): T | undefined;
  update(key: string, value: unknown): PromiseLike<void>;
}

const PAIRINGS_KEY = 'factfoil.pairings';
const RECENT_KEY = 'factfoil.recentModels';
const RECENT_MAX = 20;

export class ModelPairings {
  constructor(private readonly store: KeyValueStore) {}

  private pairings(): Record<string, string> {
    const p = this.store.get<unknown>(PAIRINGS_KEY);
    return typeof p === 'object' && p !== null && !Array.isArray(p) ? { ...(p as Record<string, string>) } : {};
  }

  /** The model last used for images in this image's folder. */
  modelFor(image: string): string | undefined {
    const m = this.pairings()[path.dirname(path.resolve(image))];
    return typeof m === 'string' ? m : undefined;
  }

  /** Models most recently used first. */
  recent(): string[] {
    const r = this.store.get<unknown>(RECENT_KEY);
    return Array.isArray(r) ? r.filter((x): x is string => typeof x === 'string') : [];
  }

  async remember(image: string, model: string): Promise<void> {
    const abs = path.resolve(model);
    const p = this.pairings();
    p[path.dirname(path.resolve(image))] = abs;
    await this.store.update(PAIRINGS_KEY, p);
    await this.store.update(RECENT_KEY, [abs, ...this.recent().filter((m) => m !== abs)].slice(0, RECENT_MAX));
  }

  /** A model that failed to load is neither paired with this image's folder nor recent any more. */
  async forget(image: string, model: string): Promise<void> {
    const abs = path.resolve(model);
    const p = this.pairings();
    const dir = path.dirname(path.resolve(image));
    if (p[dir] === abs) { delete p[dir]; await this.store.update(PAIRINGS_KEY, p); }
    const recent = this.recent();
    if (recent.includes(abs)) await this.store.update(RECENT_KEY, recent.filter((m) => m !== abs));
  }

  async forgetAll(): Promise<void> {
    await this.store.update(PAIRINGS_KEY, undefined);
    await this.store.update(RECENT_KEY, undefined);
  }
}

export interface ModelCandidate { path: string; mtimeMs: number }

export interface ModelPickItem {
  path: string;
  label: string;
  description: string;
  detail: string;
}

function ago(ms: number): string {
  const s = Math.max(0, Math.round(ms / 1000));
  if (s < 90) return 'just now';
  const m = Math.round(s / 60);
  if (m < 90) return `${m} min ago`;
  const h = Math.round(m / 60);
  if (h < 36) return `${h} h ago`;
  return `${Math.round(h / 24)} days ago`;
}

/**
 * The quick pick's items: the model paired with this image's folder first, then models by last
 * use, then the rest newest file first (ties by path, so the order is stable).
 */
export function orderModelCandidates(candidates: ModelCandidate[], opts: { paired?: string; recent?: string[]; root?: string; now?: number }): ModelPickItem[] {
  const now = opts.now ?? Date.now();
  const recent = (opts.recent ?? []).map((m) => path.resolve(m));
  const paired = opts.paired ? path.resolve(opts.paired) : undefined;
  const rank = (c: ModelCandidate) => {
    const abs = path.resolve(c.path);
    if (abs === paired) return -1;
    const r = recent.indexOf(abs);
    return r >= 0 ? r : recent.length;
  };
  const seen = new Set<string>();
  const unique = candidates.filter((c) => { const a = path.resolve(c.path); if (seen.has(a)) return false; seen.add(a); return true; });
  return unique
    .sort((a, b) => rank(a) - rank(b) || b.mtimeMs - a.mtimeMs || a.path.localeCompare(b.path))
    .map((c) => {
      const abs = path.resolve(c.path);
      const rel = opts.root ? path.relative(opts.root, abs) : abs;
      const dir = path.dirname(rel);
      const used = abs === paired ? 'used last for this folder · ' : recent.includes(abs) ? 'used recently · ' : '';
      return { path: abs, label: path.basename(abs), description: dir === '.' ? '' : dir, detail: `${used}modified ${ago(now - c.mtimeMs)}` };
    });
}
