/**
 * What the panel is asking, and the maps it already has. The host answers one request with maps
 * for all layers at once, so the store keeps them per question and stepping layers is local.
 */
import { decodeFloat32Base64 } from './float32-base64';
import { KINDS_WITH_FOIL, MapData, MapKind, MapVariant, VARIANTS_OF } from './protocol';

export interface DecodedMap { data: MapData; values: Float32Array; raw: Float32Array }

export interface Selection {
  kind: MapKind;
  contrastVariant: MapVariant;
  mismatchVariant: MapVariant;
  fact: number;
  foil: number;
}

export function variantOf(sel: Pick<Selection, 'kind' | 'contrastVariant' | 'mismatchVariant'>): MapVariant | undefined {
  if (sel.kind === 'contrast') return sel.contrastVariant;
  if (sel.kind === 'mismatch') return sel.mismatchVariant;
  return undefined;
}

/** Kinds whose map depends on the fact class (mismatch and expectancy look at all classes or none). */
const KINDS_WITH_FACT: readonly MapKind[] = ['evidence', 'contrast', 'detail', 'guided-evidence'];
export function usesFact(kind: MapKind): boolean { return KINDS_WITH_FACT.includes(kind); }
export function usesFoil(kind: MapKind): boolean { return KINDS_WITH_FOIL.includes(kind); }

/** One key per distinct question: only the parameters the kind depends on. */
export function questionKey(q: { kind: MapKind; variant?: MapVariant; fact: number; foil?: number }): string {
  const variant = VARIANTS_OF[q.kind] ? q.variant : undefined;
  return [q.kind, variant ?? '', usesFact(q.kind) ? q.fact : '', usesFoil(q.kind) ? q.foil ?? '' : ''].join('|');
}

export function selectionKey(sel: Selection): string {
  return questionKey({ kind: sel.kind, variant: variantOf(sel), fact: sel.fact, foil: sel.foil });
}

export interface StoreEntry {
  /** Maps by layer id, in the order they arrived. */
  maps: Map<string, DecodedMap>;
  /** The request still answering this question, if any. */
  pendingId?: number;
  /** True once the host said the answer is complete (exact, not a first estimate). */
  final: boolean;
  /** Layers already asked for (answered or on their way), so a wider layer list asks only for the rest. */
  asked: Set<string>;
}

export function decodeMap(data: MapData): DecodedMap {
  return { data, values: decodeFloat32Base64(data.values), raw: decodeFloat32Base64(data.raw) };
}

export class MapStore {
  private readonly entries = new Map<string, StoreEntry>();
  private readonly keyOfRequest = new Map<number, string>();

  get(key: string): StoreEntry | undefined { return this.entries.get(key); }

  /** Records that request `id` is now answering `key`. */
  begin(key: string, id: number, layers: readonly string[]): void {
    const e: StoreEntry = this.entries.get(key) ?? { maps: new Map(), final: false, asked: new Set() };
    e.pendingId = id;
    e.final = false;
    for (const l of layers) e.asked.add(l);
    this.entries.set(key, e);
    this.keyOfRequest.set(id, key);
  }

  /** Stores an answer; returns the keys it touched (an answer may span questions, e.g. mismatch per class). */
  put(id: number, maps: MapData[], final: boolean): string[] {
    const touched = new Set<string>();
    for (const m of maps) {
      const key = questionKey(m);
      const e: StoreEntry = this.entries.get(key) ?? { maps: new Map(), final: false, asked: new Set() };
      e.asked.add(m.layer);
      e.maps.set(m.layer, decodeMap(m));
      this.entries.set(key, e);
      touched.add(key);
    }
    const requested = this.keyOfRequest.get(id);
    if (requested) {
      const e = this.entries.get(requested);
      if (e && final) { e.final = true; e.pendingId = undefined; }
      touched.add(requested);
    }
    if (final) this.keyOfRequest.delete(id);
    return [...touched];
  }

  /** A request ended without (more) maps: failed or cancelled. Returns its key. */
  end(id: number): string | undefined {
    const key = this.keyOfRequest.get(id);
    this.keyOfRequest.delete(id);
    const e = key ? this.entries.get(key) : undefined;
    if (e && e.pendingId === id) {
      e.pendingId = undefined;
      // Forget the layers that never arrived, so asking again really asks.
      e.asked = new Set(e.maps.keys());
      if (e.maps.size === 0) this.entries.delete(key!);
      else e.final = true;
    }
    return key;
  }

  isMapsRequest(id: number): boolean { return this.keyOfRequest.has(id); }

  /** Drops everything (after the preprocessing or labels changed). */
  clear(): void { this.entries.clear(); this.keyOfRequest.clear(); }
}
