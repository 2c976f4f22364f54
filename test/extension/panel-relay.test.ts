/**
 * The host side of the panel without a window: a scripted engine stands in for the engine
 * process, and every message the relay posts must pass the panel's own validator.
 */
import { strict as assert } from 'node:assert';
import { mkdtempSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { EngineMap, EngineOp, EngineRequestOf, EngineResultOf, ViewInfo } from '../../core/engine-process/protocol';
import { EngineLike, EngineRequestError, PendingRequest, RequestHandlers } from '../../extension/engine-client';
import { PanelRelay, PanelUi, editorHint, initMessage, savedMessage } from '../../extension/panel-relay';
import { DEFAULT_SETTINGS, FactfoilSettings } from '../../extension/settings';
import { PROTOCOL_VERSION, ToWebview, checkToWebview } from '../../webview/protocol';

const LABELS = ['hex-nut', 'washer', 'bearing', 'spring', 'bolt', 'gear', 'clip', 'bracket'];

function f32b64(n: number, v = 0.5): string {
  return Buffer.from(new Float32Array(n).fill(v).buffer).toString('base64');
}

function view(id: string): ViewInfo {
  return {
    viewId: id,
    summary: {
      path: '/w/parts-sorter.onnx', name: 'parts-sorter.onnx', sha256: 'ab'.repeat(32),
      input: { name: 'image', dims: [1, 3, 4, 4], declared: [1, 3, 4, 4] },
      scores: { tensor: 'logits', source: 'output', numClasses: 8 }, classes: LABELS, gray: false,
      settings: { preprocessing: { width: 4, height: 4, resize: 'stretch', channels: 'RGB', layout: 'NCHW', scale: 1 / 255, mean: [0, 0, 0], std: [1, 1, 1] }, labelsFile: 'labels.txt' },
      origin: { preprocessing: 'sidecar', labels: 'sidecar', labelsFrom: '/w/labels.txt' },
      layers: [
        { index: 0, id: 'a', short: 'a', shape: [2, 2, 2], kind: 'spatial', grid: [2, 2], stage: false, explainable: false, blockedBy: { opType: 'TopK', node: 'n1' } },
        { index: 1, id: 'stage1', short: 'stage1', shape: [2, 2, 3], kind: 'spatial', grid: [2, 3], stage: true, explainable: true },
      ],
    },
    image: { path: '/w/washer/washer-0001.png', name: 'washer-0001.png', width: 8, height: 8, format: 'png', geometry: { kind: 'stretch', scaleX: 2, scaleY: 2, offsetX: 0, offsetY: 0 } },
    prediction: LABELS.map((label, index) => ({ index, label, p: index === 1 ? 0.65 : 0.05 })).sort((a, b) => b.p - a.p),
    expected: 1,
  };
}

function map(id: string, estimate?: EngineMap['estimate']): EngineMap {
  return { mapId: id, kind: 'mismatch', variant: 'weighted', layer: 'stage1', layerShort: 'stage1', fact: 1, width: 4, height: 4, values: f32b64(16), rawWidth: 3, rawHeight: 2, raw: f32b64(6), range: { lo: 0, hi: 1 }, ...(estimate ? { estimate } : {}) };
}

interface Call { id: number; req: EngineRequestOf<EngineOp>; handlers: RequestHandlers<EngineOp>; resolve(v: unknown): void; reject(e: Error): void }

/** An engine that records requests and lets the test answer them. */
class ScriptedEngine implements EngineLike {
  calls: Call[] = [];
  cancelled: number[] = [];
  generation = 1;
  private next = 100;
  /** Answer openView at once (most tests do not care about it). */
  autoOpen = true;
  /** The image path the opened view reports (tests that write files point it at a temporary folder). */
  imagePath?: string;
  views = 0;

  request<O extends EngineOp>(req: EngineRequestOf<O>, handlers: RequestHandlers<O> = {}): PendingRequest<O> {
    const id = this.next++;
    let resolve!: (v: unknown) => void, reject!: (e: Error) => void;
    const result = new Promise<EngineResultOf<O>>((res, rej) => { resolve = res as (v: unknown) => void; reject = rej; });
    const call = { id, req: req as EngineRequestOf<EngineOp>, handlers: handlers as RequestHandlers<EngineOp>, resolve, reject };
    this.calls.push(call);
    if (req.op === 'openView' && this.autoOpen) {
      const v = view(`v${++this.views}`);
      if (this.imagePath) v.image.path = this.imagePath;
      resolve(v);
    }
    if (req.op === 'closeView') resolve({});
    return { id, result };
  }
  cancel(id: number): void { this.cancelled.push(id); }
  last(op: EngineOp): Call {
    const c = [...this.calls].reverse().find((x) => x.req.op === op);
    if (!c) throw new Error(`no ${op} request; got ${this.calls.map((x) => x.req.op).join(', ')}`);
    return c;
  }
}

const tick = () => new Promise((r) => setImmediate(r));

function setup(settings: Partial<FactfoilSettings> = {}, opened?: (ok: boolean) => void) {
  const engine = new ScriptedEngine();
  const posted: ToWebview[] = [];
  const logs: string[] = [];
  const ui = {
    progress: [] as { title: string; reports: [number, number][]; ended: boolean; cancel: () => void }[],
    saved: [] as string[][], revealed: [] as string[], labelsPick: undefined as string | undefined,
  };
  const panelUi: PanelUi = {
    startProgress: (title, onCancel) => {
      const p = { title, reports: [] as [number, number][], ended: false, cancel: onCancel };
      ui.progress.push(p);
      return { report: (d, t) => p.reports.push([d, t]), end: () => { p.ended = true; } };
    },
    saved: (files) => ui.saved.push(files),
    reveal: (f) => ui.revealed.push(f),
    pickLabelsFile: async () => ui.labelsPick,
    imageUri: (v) => `https://file+.vscode-resource.vscode-cdn.net${v.image.path}`,
  };
  const relay = new PanelRelay({
    engine, target: { model: '/w/parts-sorter.onnx', image: '/w/washer/washer-0001.png' },
    post: (m) => posted.push(m), ui: panelUi,
    log: { info: (m) => logs.push(`info ${m}`), warn: (m) => logs.push(`warn ${m}`), error: (m) => logs.push(`error ${m}`) },
    settings: () => ({ ...DEFAULT_SETTINGS, ...settings }),
    saveFolder: () => settings.saveLocation === 'folder' ? '/w/maps' : undefined,
    ...(opened ? { opened } : {}),
  });
  const ofType = <T extends ToWebview['type']>(t: T) => posted.filter((m): m is Extract<ToWebview, { type: T }> => m.type === t);
  return { engine, posted, logs, ui, relay, ofType };
}

describe('panel relay (extension host side of the panel)', () => {
  it('answers ready with an init the panel accepts: explainable layers only, expected label, defaults from settings', async () => {
    const { relay, posted, engine } = setup({ defaultMapKind: 'mismatch', colormap: 'inferno' });
    relay.receive({ type: 'ready', version: PROTOCOL_VERSION });
    await tick();
    assert.equal(engine.last('openView').req.op, 'openView');
    const init = posted[0];
    assert.equal(init.type, 'init');
    if (init.type !== 'init') return;
    assert.ok(checkToWebview(init).ok);
    assert.deepEqual(init.layers, [{ id: 'stage1', short: 'stage1', gridWidth: 3, gridHeight: 2, stage: true }]);
    assert.equal(init.expected, 1);
    assert.deepEqual(init.defaults, { kind: 'mismatch', colormap: 'inferno', estimate: 'auto' });
    assert.match(init.image.uri, /^https:\/\/file\+\.vscode-resource/);
  });

  it('tells the host whether the model opened, so only a model that loads is remembered', async () => {
    const good: boolean[] = [];
    const ok = setup({}, (o) => good.push(o));
    ok.relay.receive({ type: 'ready', version: PROTOCOL_VERSION });
    await tick();
    assert.deepEqual(good, [true]);
    for (const [kind, heard] of [['user', [false]], ['internal', [false]], ['stopped', []], ['cancelled', []]] as const) {
      const said: boolean[] = [];
      const bad = setup({}, (o) => said.push(o));
      bad.engine.autoOpen = false;
      bad.relay.receive({ type: 'ready', version: PROTOCOL_VERSION });
      await tick();
      bad.engine.last('openView').reject(new EngineRequestError(kind, 'cannot read /w/parts-sorter.onnx'));
      await tick(); await tick();
      assert.deepEqual(said, heard, kind);
    }
  });

  it('passes the decoder\'s note on an image (first frame of an animation) to the panel as a notice', async () => {
    const { relay, posted, engine } = setup();
    engine.autoOpen = false;
    relay.receive({ type: 'ready', version: PROTOCOL_VERSION });
    await tick();
    const v = view('v1');
    v.image.note = '/w/anim.gif holds 3 frames; the first is used';
    engine.last('openView').resolve(v);
    await tick();
    assert.deepEqual(posted.map((m) => m.type), ['init', 'notice']);
    assert.deepEqual(posted[1], { type: 'notice', level: 'info', message: v.image.note });
  });

  it('drops malformed or unknown messages and logs why, without asking the engine anything', async () => {
    const { relay, engine, logs, posted } = setup();
    relay.receive({ type: 'requestMaps', id: 1, kind: 'contrast', fact: 0, layers: ['stage1'] }); // contrast without a foil
    relay.receive({ type: 'runShell', command: 'rm -rf /' });
    relay.receive({ type: 'save', id: 2, mapId: 'm', colormap: 'viridis', opacity: 2, range: { lo: 0, hi: 1 }, includeRaw: false });
    relay.receive('ready');
    await tick();
    assert.equal(engine.calls.length, 0);
    assert.equal(posted.length, 0);
    assert.equal(logs.filter((l) => l.startsWith('warn dropped a malformed message')).length, 4);
    assert.match(logs[0], /foil/);
    assert.match(logs[1], /unknown message type "runShell"/);
    assert.match(logs[2], /opacity/);
  });

  it('relays a mismatch request: probe estimate first (final: false), then exact (final: true), progress with Cancel', async () => {
    const { relay, engine, ofType, ui } = setup({ probeSeeds: 4, memoryBudgetMB: 256 });
    relay.receive({ type: 'requestMaps', id: 7, kind: 'mismatch', variant: 'weighted', fact: 1, layers: ['stage1'], estimate: 'auto' });
    await tick();
    const call = engine.last('maps');
    assert.deepEqual(call.req, { op: 'maps', viewId: 'v1', kind: 'mismatch', variant: 'weighted', fact: 1, layers: ['stage1'], estimate: 'probe-then-exact', probeSeeds: 4, budgetMiB: 256 });
    call.handlers.onProgress!(4, 4, 'probe estimate with 4 seeds');
    call.handlers.onPartial!({ maps: [map('p1', { mode: 'probe', k: 4 })] });
    assert.equal(ui.progress.length, 0, 'no notification for the probe');
    call.handlers.onProgress!(2, 8, 'exact sweep over all 8 classes');
    assert.equal(ui.progress.length, 1, 'the exact sweep gets a cancellable notification');
    assert.match(ui.progress[0].title, /all 8 classes/);
    call.resolve({ maps: [map('e1', { mode: 'exact' })] });
    await tick();
    const results = ofType('mapsResult');
    assert.deepEqual(results.map((r) => [r.id, r.final, r.maps[0].mapId]), [[7, false, 'p1'], [7, true, 'e1']]);
    assert.deepEqual(ofType('progress').map((p) => [p.done, p.total]), [[4, 4], [2, 8]]);
    assert.equal(ui.progress[0].ended, true);
    // Cancel from the notification reaches the engine request.
    ui.progress[0].cancel();
    assert.deepEqual(engine.cancelled, [call.id]);
  });

  it('maps the panel\'s cancel to the engine request and reports the cancel as failed/cancelled', async () => {
    const { relay, engine, ofType } = setup();
    relay.receive({ type: 'requestMaps', id: 3, kind: 'contrast', variant: 'margin', fact: 1, foil: 2, layers: ['stage1'] });
    await tick();
    const call = engine.last('maps');
    assert.equal((call.req as EngineRequestOf<'maps'>).estimate, 'exact', 'non-mismatch maps need no estimate');
    relay.receive({ type: 'cancel', id: 3 });
    await tick();
    assert.deepEqual(engine.cancelled, [call.id]);
    call.reject(new EngineRequestError('cancelled', 'cancelled'));
    await tick();
    assert.deepEqual(ofType('failed'), [{ type: 'failed', id: 3, message: 'cancelled', cancelled: true }]);
  });

  it('saves through the engine, tells the user with Reveal, and reveals only files it saved', async () => {
    const { relay, engine, ofType, ui, logs } = setup();
    relay.receive({ type: 'save', id: 4, mapId: 'v1m3', colormap: 'inferno', opacity: 0.4, range: { lo: 0, hi: 2 }, includeRaw: true });
    await tick();
    const call = engine.last('save');
    assert.deepEqual(call.req, { op: 'save', viewId: 'v1', mapId: 'v1m3', colormap: 'inferno', opacity: 0.4, range: { lo: 0, hi: 2 }, includeRaw: true });
    const files = ['/w/washer/washer-0001.mismatch.stage1.washer.png', '/w/washer/washer-0001.mismatch.stage1.washer.json', '/w/washer/washer-0001.mismatch.stage1.washer.npy'];
    call.resolve({ files });
    await tick();
    const r = ofType('saveResult')[0];
    assert.equal(r.message, 'Saved washer-0001.mismatch.stage1.washer.png, its record and the raw map beside the image.');
    assert.deepEqual(ui.saved, [files]);
    relay.receive({ type: 'reveal', path: files[0] });
    relay.receive({ type: 'reveal', path: '/etc/passwd' });
    await tick();
    assert.deepEqual(ui.revealed, [files[0]]);
    assert.ok(logs.some((l) => /did not save; ignored/.test(l)));
  });

  it('saves into the configured folder when saveLocation is folder', async () => {
    const { relay, engine } = setup({ saveLocation: 'folder' });
    relay.receive({ type: 'save', id: 4, mapId: 'v1m3', colormap: 'viridis', opacity: 0.6, range: { lo: 0, hi: 1 }, includeRaw: false });
    await tick();
    assert.equal((engine.last('save').req as EngineRequestOf<'save'>).outDir, '/w/maps');
  });

  it('reopens the view after the engine restarted, and passes a user error on with its hint', async () => {
    const { relay, engine, ofType } = setup();
    relay.receive({ type: 'ready', version: PROTOCOL_VERSION });
    await tick();
    relay.engineStopped('The Factfoil engine ran out of memory and was restarted.', 'Lower factfoil.memoryBudgetMB');
    assert.equal(ofType('notice')[0].message, 'The Factfoil engine ran out of memory and was restarted.');
    engine.generation = 2;
    relay.receive({ type: 'requestMaps', id: 9, kind: 'evidence', fact: 1, layers: ['stage1'] });
    await tick();
    assert.equal(engine.calls.filter((c) => c.req.op === 'openView').length, 2, 'a fresh view in the new process');
    assert.equal((engine.last('maps').req as EngineRequestOf<'maps'>).viewId, 'v2');
    engine.last('maps').reject(new EngineRequestError('user', "layer 'x' cannot be explained", 'pick a deeper layer'));
    await tick();
    assert.deepEqual(ofType('failed')[0], { type: 'failed', id: 9, message: "layer 'x' cannot be explained", hint: 'pick a deeper layer' });
  });

  it('writes settings through the engine and answers with the new labels, prediction and image', async () => {
    const { relay, engine, ofType } = setup();
    const settings = { preprocessing: { width: 4, height: 4, resize: 'crop' as const, channels: 'BGR' as const, layout: 'NCHW' as const, scale: 1, mean: [1, 2, 3] as [number, number, number], std: [1, 1, 1] as [number, number, number] }, labelsFile: 'labels.txt' };
    relay.receive({ type: 'updateSettings', id: 5, settings });
    await tick();
    const call = engine.last('updateSettings');
    assert.deepEqual(call.req, { op: 'updateSettings', viewId: 'v1', settings });
    const v = view('v1');
    v.summary.settings = settings;
    call.resolve(v);
    await tick();
    const r = ofType('settingsResult')[0];
    assert.deepEqual(r.settings, settings);
    assert.equal(r.labels.length, 8);
  });

  it('answers pickLabelsFile with the chosen path, or none when the dialog is dismissed', async () => {
    const { relay, ui, ofType } = setup();
    relay.receive({ type: 'pickLabelsFile', id: 11 });
    await tick();
    ui.labelsPick = '/w/labels.txt';
    relay.receive({ type: 'pickLabelsFile', id: 12 });
    await tick();
    assert.deepEqual(ofType('labelsFileResult'), [{ type: 'labelsFileResult', id: 11 }, { type: 'labelsFileResult', id: 12, path: '/w/labels.txt' }]);
  });

  it('a settings change may name only the current labels file or one chosen in the dialog', async () => {
    const { relay, engine, ui, ofType, logs } = setup();
    const preprocessing = { width: 4, height: 4, resize: 'crop' as const, channels: 'RGB' as const, layout: 'NCHW' as const, scale: 1, mean: [0, 0, 0] as [number, number, number], std: [1, 1, 1] as [number, number, number] };
    relay.receive({ type: 'updateSettings', id: 30, settings: { preprocessing, labelsFile: '/etc/passwd' } });
    await tick();
    assert.equal(engine.calls.filter((c) => c.req.op === 'updateSettings').length, 0, 'never reaches the engine');
    assert.match(ofType('failed')[0].message, /not chosen in the file dialog/);
    assert.ok(logs.some((l) => /\/etc\/passwd/.test(l)));
    ui.labelsPick = '/w/other-labels.txt';
    relay.receive({ type: 'pickLabelsFile', id: 31 });
    await tick();
    relay.receive({ type: 'updateSettings', id: 32, settings: { preprocessing, labelsFile: '/w/other-labels.txt' } });
    await tick();
    assert.equal(engine.calls.filter((c) => c.req.op === 'updateSettings').length, 1);
  });

  it('does not post a message the panel would reject (a label longer than the protocol allows)', async () => {
    const { relay, engine, posted, logs } = setup();
    engine.autoOpen = false;
    relay.receive({ type: 'ready', version: PROTOCOL_VERSION });
    await tick();
    const v = view('v1');
    v.summary.classes = LABELS.map((l, i) => (i === 0 ? 'x'.repeat(300) : l));
    engine.last('openView').resolve(v);
    await tick();
    await tick();
    assert.equal(posted.length, 0);
    assert.ok(logs.some((l) => /not sending a malformed init/.test(l)));
  });

  it('relays a trust request: fields passed on, progress as whole-step trustProgress (no notification over the panel), cancel by the panel, the report as trustResult', async () => {
    const { relay, engine, ofType, ui } = setup();
    relay.receive({ type: 'requestTrust', id: 21, layer: 'stage1', fact: 1, foil: 2, tests: ['truth', 'sanity'], kinds: ['evidence'], box: { x: 1, y: 2, width: 3, height: 4 }, seed: 7 });
    await tick();
    const call = engine.last('trust');
    assert.deepEqual(call.req, { op: 'trust', viewId: 'v1', layer: 'stage1', fact: 1, foil: 2, tests: ['truth', 'sanity'], kinds: ['evidence'], box: { x: 1, y: 2, width: 3, height: 4 }, seed: 7 });
    call.handlers.onProgress!(1, 5, 'maps of the trained model');
    call.handlers.onProgress!(1.656862745098039, 5, 'deletion and insertion');
    assert.equal(ui.progress.length, 0, 'the panel shows trust progress itself');
    relay.receive({ type: 'cancel', id: 21 });
    assert.deepEqual(engine.cancelled, [call.id]);
    const report = { format: 'factfoil-trust/1', layer: 'stage1', fact: 1, foil: 2, p_fact: 0.65, kinds: ['evidence'], seed: 7, notes: [] };
    call.resolve(report);
    await tick();
    assert.deepEqual(ofType('trustProgress'), [
      { type: 'trustProgress', id: 21, done: 1, total: 5, message: 'maps of the trained model' },
      { type: 'trustProgress', id: 21, done: 1, total: 5, message: 'deletion and insertion' },
    ]);
    assert.deepEqual(ofType('trustResult'), [{ type: 'trustResult', id: 21, report }]);
    // A box and a mask together never reach the engine.
    relay.receive({ type: 'requestTrust', id: 22, layer: 'stage1', fact: 1, tests: ['truth'], box: { x: 1, y: 2, width: 3, height: 4 }, maskFile: '/m.png' });
    await tick();
    assert.equal(engine.calls.filter((c) => c.req.op === 'trust').length, 1);
    // A mask path from the webview is not passed on: the engine looks up the image's own mask.
    relay.receive({ type: 'requestTrust', id: 23, layer: 'stage1', fact: 1, tests: ['truth'], maskFile: '/etc/passwd' });
    await tick();
    const trusts = engine.calls.filter((c) => c.req.op === 'trust');
    assert.equal(trusts.length, 2);
    assert.equal((trusts[1].req as { maskFile?: string }).maskFile, undefined);
  });

  it('saves a trust report it received (JSON from the engine, PNG charts from the panel) beside the image, never overwriting', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'factfoil-relay-trust-'));
    try {
      const image = join(dir, 'washer-0001.png');
      const { relay, engine, ofType, ui } = setup();
      engine.imagePath = image;
      // Nothing is held before a report arrived.
      relay.receive({ type: 'saveTrust', id: 30, trustId: 31, charts: [] });
      await tick();
      assert.match(ofType('failed')[0].message, /no longer held/);
      relay.receive({ type: 'requestTrust', id: 31, layer: 'stage1', fact: 1, tests: ['faithfulness'] });
      await tick(); await tick();
      const report = { format: 'factfoil-trust/1', layer: 'stage1', fact: 1, p_fact: 0.65, kinds: ['evidence'], seed: 7, notes: [] };
      engine.last('trust').resolve(report);
      await tick();
      // A PNG signature plus one byte (PNG specification 5.2) is enough for the relay's check.
      const png = Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0]).toString('base64');
      relay.receive({ type: 'saveTrust', id: 32, trustId: 31, charts: [{ name: 'faithfulness', png: Buffer.from('GIF89a--').toString('base64') }] });
      for (let i = 0; i < 200 && ofType('failed').length < 2; i++) await new Promise((r) => setTimeout(r, 5));
      assert.match(ofType('failed')[1].message, /could not be rendered as a PNG; nothing was saved/);
      assert.deepEqual(readdirSync(dir), []);
      for (const [n, id] of [[1, 33], [2, 34]]) {
        relay.receive({ type: 'saveTrust', id, trustId: 31, charts: [{ name: 'faithfulness', png }] });
        for (let i = 0; i < 200 && ofType('saveResult').length < n; i++) await new Promise((r) => setTimeout(r, 5));
      }
      const saved = ofType('saveResult');
      assert.deepEqual(saved.map((m) => m.files.map((f) => f.slice(dir.length + 1))), [
        ['washer-0001.trust.stage1.washer.json', 'washer-0001.trust.stage1.washer.faithfulness.png'],
        ['washer-0001.trust.stage1.washer-2.json', 'washer-0001.trust.stage1.washer-2.faithfulness.png'],
      ]);
      assert.equal(saved[0].message, 'Saved the trust report washer-0001.trust.stage1.washer.json and 1 chart beside the image.');
      assert.equal(JSON.parse(readFileSync(saved[0].files[0], 'utf8')).format, 'factfoil-trust/1');
      assert.equal(ui.saved.length, 2);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('names the editor setting when a hint says to raise the memory budget (no hint that points nowhere)', async () => {
    assert.equal(editorHint('pick a deeper layer, a smaller input size, or raise the memory budget'),
      'pick a deeper layer, a smaller input size, or raise the memory budget (setting Factfoil: Memory Budget MB, factfoil.memoryBudgetMB)');
    assert.equal(editorHint('check the box coordinates'), 'check the box coordinates');
    const { relay, engine, ofType } = setup();
    relay.receive({ type: 'requestMaps', id: 40, kind: 'mismatch', fact: 1, layers: ['stage1'] });
    await tick(); await tick();
    engine.last('maps').reject(new EngineRequestError('user', 'explaining stage1 needs about 900 MB', 'pick a deeper layer, or raise the memory budget'));
    await tick();
    assert.match(ofType('failed')[0].hint ?? '', /factfoil\.memoryBudgetMB/);
  });

  it('initMessage and savedMessage say where things are', () => {
    const m = initMessage(view('v1'), 'data:image/png;base64,AAAA', DEFAULT_SETTINGS);
    assert.equal(m.model.scores, 'logits');
    assert.equal(savedMessage(['/out/a.contrast.s.x.png', '/out/a.contrast.s.x.json'], '/w/a.png'), 'Saved a.contrast.s.x.png and its record in /out.');
  });
});
