/**
 * Stands in for the extension host: installs acquireVsCodeApi in the page, checks every message
 * the panel posts with the shared validator, and answers the way the host is specified to
 * (ready → init; requestMaps → maps for all requested layers at once, a probe estimate first for
 * mismatch; save → saveResult; updateSettings → settingsResult).
 */
import { join } from 'node:path';
import type { Page } from 'playwright-core';
import { FromWebview, InitMessage, MapData, RequestMapsMessage, ToWebview, checkFromWebview } from '../../../webview/protocol';
import { MODEL, STAGES, synthMap } from './synthetic-scene';

export const FLAT_NOTE = 'flat at this layer: paths to the scores are only pooling and linear ops';

export class ScriptedHost {
  readonly received: FromWebview[] = [];
  readonly invalid: { message: unknown; reason: string }[] = [];
  /** Every map sent, by id, so tests can compare what the page shows with what was sent. */
  readonly sentMaps = new Map<string, MapData>();
  /** When set, the exact mismatch answer waits for release(). */
  holdExact = false;
  /** When set, the next maps request only gets a progress message (to test Cancel). */
  stallNext = false;
  /** When set, ready is answered with this error notice instead of init (a model that fails to open). */
  failOpen?: { message: string; hint?: string };
  /** When set, maps requests are only recorded: the test answers them with answer(). */
  manualMaps = false;
  /** When set, the next request fails with this message. */
  failNext?: { message: string; hint?: string };
  private held: (() => Promise<void>)[] = [];

  constructor(private readonly page: Page, private readonly init: InitMessage) {}

  async attach(): Promise<void> {
    await this.page.exposeBinding('__factfoilHost', (_source, message: unknown) => this.receive(message));
    await this.page.addInitScript({ path: join(__dirname, 'vscode-api-shim.js') });
  }

  /** Posts a message to the panel the way a webview receives one from its host. */
  async send(message: ToWebview | Record<string, unknown>): Promise<void> {
    await this.page.evaluate((m) => window.postMessage(m, '*'), message);
  }

  async release(): Promise<void> {
    const held = this.held;
    this.held = [];
    for (const h of held) await h();
  }

  ofType<T extends FromWebview['type']>(type: T): Extract<FromWebview, { type: T }>[] {
    return this.received.filter((m): m is Extract<FromWebview, { type: T }> => m.type === type);
  }

  last<T extends FromWebview['type']>(type: T): Extract<FromWebview, { type: T }> | undefined {
    const all = this.ofType(type);
    return all[all.length - 1];
  }

  async waitFor<T extends FromWebview['type']>(type: T, count = 1): Promise<Extract<FromWebview, { type: T }>> {
    for (let i = 0; i < 200; i++) {
      const all = this.ofType(type);
      if (all.length >= count) return all[count - 1];
      await new Promise((r) => setTimeout(r, 25));
    }
    throw new Error(`the panel never sent ${count} × ${type}; it sent ${this.received.map((m) => m.type).join(', ')}`);
  }

  private async receive(message: unknown): Promise<void> {
    const checked = checkFromWebview(message);
    if (!checked.ok) { this.invalid.push({ message, reason: checked.reason }); return; }
    const m = checked.message;
    this.received.push(m);
    if (m.type !== 'ready' && m.type !== 'cancel' && m.type !== 'reveal' && m.type !== 'log' && this.failNext) {
      const f = this.failNext;
      this.failNext = undefined;
      await this.send({ type: 'failed', id: m.id, message: f.message, hint: f.hint });
      return;
    }
    switch (m.type) {
      case 'ready': return this.failOpen ? this.send({ type: 'notice', level: 'error', ...this.failOpen }) : this.send(this.init);
      case 'requestMaps': return this.answerMaps(m);
      case 'save': {
        const map = this.sentMaps.get(m.mapId);
        const stem = `belt-0417.${map?.kind ?? 'map'}.${map?.layerShort ?? 'x'}`;
        return this.send({ type: 'saveResult', id: m.id, files: [`/work/parts/${stem}.png`, `/work/parts/${stem}.json`], message: `Saved ${stem}.png and its record beside the image` });
      }
      case 'updateSettings':
        return this.send({
          type: 'settingsResult', id: m.id, settings: m.settings, labels: this.init.labels,
          prediction: this.init.prediction.map((p, i) => ({ ...p, p: i === 0 ? 0.55 : p.p })), expected: this.init.expected, image: this.init.image,
          // Writing settings makes the sidecar: preprocessing and labels now come from it.
          origin: { preprocessing: 'sidecar', labels: 'sidecar' },
        });
      case 'pickLabelsFile': return this.send({ type: 'labelsFileResult', id: m.id, path: '/work/parts/labels-v2.txt' });
      default: return undefined;
    }
  }

  /** Answers a recorded maps request with synthetic maps for every layer it asked. */
  async answer(m: RequestMapsMessage, final = true, estimate?: MapData['estimate']): Promise<void> {
    const q = { kind: m.kind, variant: m.variant, fact: m.fact, foil: m.foil };
    const maps = m.layers.map((id) => synthMap(q, STAGES.find((s) => s.id === id) ?? { id, short: id, grid: 12 }, estimate));
    for (const x of maps) this.sentMaps.set(x.mapId, x);
    await this.send({ type: 'mapsResult', id: m.id, maps, final });
  }

  private async answerMaps(m: RequestMapsMessage): Promise<void> {
    if (this.manualMaps) return;
    const q = { kind: m.kind, variant: m.variant, fact: m.fact, foil: m.foil };
    if (this.stallNext) {
      this.stallNext = false;
      await this.send({ type: 'progress', id: m.id, done: 1, total: 4, message: 'Exact sweep: seed chunk 1 of 4' });
      return;
    }
    const layers = m.kind === 'detail'
      ? [{ id: 'input', short: 'input', grid: MODEL }]
      : m.layers.map((id) => STAGES.find((s) => s.id === id) ?? { id, short: id.split('/')[2] ?? id, grid: 12 });
    const note = (layer: string) => (m.kind === 'mismatch' && m.variant === 'gradient' && layer === STAGES[3].id ? FLAT_NOTE : undefined);
    const send = async (estimate: MapData['estimate'], final: boolean) => {
      const maps = layers.map((l) => synthMap(q, l, estimate, note(l.id)));
      for (const x of maps) this.sentMaps.set(x.mapId, x);
      await this.send({ type: 'mapsResult', id: m.id, maps, final });
    };
    if (m.kind === 'mismatch') {
      await this.send({ type: 'progress', id: m.id, done: 0, total: 8, message: 'Probe estimate, then the exact sweep' });
      await send({ mode: 'probe', k: 16 }, false);
      const exact = () => send({ mode: 'exact' }, true);
      if (this.holdExact) this.held.push(exact); else await exact();
      return;
    }
    await send(undefined, true);
  }
}
