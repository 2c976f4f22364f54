/**
 * The `factfoil.*` settings, resolved from whatever the configuration returns (wrong types and
 * out-of-range numbers fall back to the defaults, so a typo in settings.json never breaks a map).
 * No vscode import: the caller passes a getter.
 */
import * as path from 'node:path';
import { COLORMAPS, ColormapName, EstimateChoice, MAP_KINDS, MapKind } from '../webview/protocol';

export const SETTINGS_SECTION = 'factfoil';

export type SaveLocation = 'besideImage' | 'folder';

export interface FactfoilSettings {
  /** Folder (absolute, or relative to the workspace folder) → model file. */
  defaultModels: Record<string, string>;
  defaultMapKind: MapKind;
  colormap: ColormapName;
  estimate: EstimateChoice;
  probeSeeds: number;
  /** onnxruntime intra-op threads; 0 lets the runtime decide. */
  threads: number;
  /** Memory for one seed chunk, in MB of 2^20 bytes (the id once ended in MiB, which VS Code titled "Mi B"). */
  memoryBudgetMB: number;
  saveLocation: SaveLocation;
  /** Used when saveLocation is 'folder'; relative to the image's workspace folder. */
  saveFolder: string;
}

export const DEFAULT_SETTINGS: FactfoilSettings = {
  defaultModels: {},
  defaultMapKind: 'contrast',
  colormap: 'viridis',
  estimate: 'auto',
  // 32 probes: the probe estimate's relative error falls as 1/√K; 32 gives a usable first
  // picture in a fraction of an all-class sweep for models with hundreds of classes (rule of thumb, no source).
  probeSeeds: 32,
  threads: 0,
  // 1 GiB per seed chunk, the engine's own default (core/engine/budget.ts).
  memoryBudgetMB: 1024,
  saveLocation: 'besideImage',
  saveFolder: 'factfoil-maps',
};

/** Setting ids that were renamed, and the old id still read when only it is set. */
export const RENAMED_SETTINGS = { memoryBudgetMB: 'memoryBudgetMiB' } as const;

/** The user's value of a setting, or undefined when none is set (the defaults are ours). */
export type SettingGetter = (key: keyof FactfoilSettings | (typeof RENAMED_SETTINGS)[keyof typeof RENAMED_SETTINGS]) => unknown;

function intIn(v: unknown, lo: number, hi: number, fallback: number): number {
  return typeof v === 'number' && Number.isInteger(v) && v >= lo && v <= hi ? v : fallback;
}
function oneOf<T extends string>(v: unknown, allowed: readonly T[], fallback: T): T {
  return allowed.includes(v as T) ? (v as T) : fallback;
}

export function resolveSettings(get: SettingGetter): FactfoilSettings {
  const d = DEFAULT_SETTINGS;
  const models = get('defaultModels');
  const defaultModels: Record<string, string> = {};
  if (typeof models === 'object' && models !== null && !Array.isArray(models)) {
    for (const [k, v] of Object.entries(models)) if (typeof v === 'string' && v.trim() && k.trim()) defaultModels[k] = v;
  }
  const folder = get('saveFolder');
  return {
    defaultModels,
    defaultMapKind: oneOf(get('defaultMapKind'), MAP_KINDS, d.defaultMapKind),
    colormap: oneOf(get('colormap'), COLORMAPS, d.colormap),
    estimate: oneOf(get('estimate'), ['auto', 'exact', 'probe'] as const, d.estimate),
    probeSeeds: intIn(get('probeSeeds'), 1, 4096, d.probeSeeds),
    threads: intIn(get('threads'), 0, 256, d.threads),
    memoryBudgetMB: intIn(get('memoryBudgetMB') ?? get(RENAMED_SETTINGS.memoryBudgetMB), 64, 1 << 20, d.memoryBudgetMB),
    saveLocation: oneOf(get('saveLocation'), ['besideImage', 'folder'] as const, d.saveLocation),
    saveFolder: typeof folder === 'string' && folder.trim() ? folder : d.saveFolder,
  };
}

function within(child: string, parent: string): boolean {
  const rel = path.relative(parent, child);
  return rel === '' || (!rel.startsWith('..') && !path.isAbsolute(rel));
}

/**
 * The configured default model for an image: the entry whose folder contains the image most
 * closely (deepest folder wins). Relative folders and models are resolved against the workspace folder.
 */
export function defaultModelFor(image: string, settings: FactfoilSettings, workspaceFolder: string | undefined): string | undefined {
  let best: { depth: number; model: string } | undefined;
  for (const [folder, model] of Object.entries(settings.defaultModels)) {
    const abs = path.isAbsolute(folder) ? folder : workspaceFolder ? path.join(workspaceFolder, folder) : undefined;
    if (!abs || !within(path.resolve(image), path.resolve(abs))) continue;
    const depth = path.resolve(abs).split(path.sep).length;
    const m = path.isAbsolute(model) ? model : workspaceFolder ? path.join(workspaceFolder, model) : undefined;
    if (m && (!best || depth > best.depth)) best = { depth, model: m };
  }
  return best?.model;
}

/** Where a saved map goes: undefined = beside the image; otherwise a folder. */
export function saveFolderFor(image: string, settings: FactfoilSettings, workspaceFolder: string | undefined): string | undefined {
  if (settings.saveLocation === 'besideImage') return undefined;
  if (path.isAbsolute(settings.saveFolder)) return settings.saveFolder;
  return path.join(workspaceFolder ?? path.dirname(image), settings.saveFolder);
}

/** The estimate plan the engine runs for a panel's choice (DESIGN §7: a probe first, then refined). */
export function estimatePlan(kind: MapKind, choice: EstimateChoice | undefined, settings: FactfoilSettings): 'exact' | 'probe' | 'probe-then-exact' {
  const c = choice ?? settings.estimate;
  if (kind !== 'mismatch') return 'exact';
  return c === 'auto' ? 'probe-then-exact' : c;
}
