/**
 * The `.onnx` summary page: built from the demo model's real summary (the engine service run in
 * this process), opened in headless Debian Chromium under its own CSP, clicked and dropped on;
 * screenshots in light and dark go to test-output/screenshots/model-summary-*.png.
 */
import { strict as assert } from 'node:assert';
import { copyFileSync, existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { chromium, BrowserContext } from 'playwright-core';
import { EngineService } from '../../core/engine-process/service';
import type { ModelSummary } from '../../core/engine-process/protocol';
import { checkEditorMessage, modelSummaryHtml } from '../../extension/model-summary-html';
import { FIXTURES } from '../helpers';

const ROOT = path.resolve(__dirname, '..', '..');
const SHOTS = path.join(ROOT, 'test-output', 'screenshots');
const CHROMIUM = '/usr/bin/chromium';
const ARGS = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run'];
/** What webview.cspSource is in desktop VS Code (from memory). */
const CSP_SOURCE = 'https://*.vscode-cdn.net';
const THEMES = readFileSync(path.join(ROOT, 'test', 'webview', 'harness', 'themes.css'), 'utf8');

const noContext = { signal: new AbortController().signal, progress: () => undefined, partial: () => undefined, log: () => undefined };

describe('model summary page (custom editor for .onnx)', function () {
  this.timeout(120_000);
  let summary: ModelSummary;
  let catalog: ModelSummary;
  let bare: ModelSummary;
  let context: BrowserContext;
  let profile: string;

  before(async () => {
    const service = new EngineService();
    summary = (await service.handle({ op: 'openModel', model: path.join(FIXTURES, 'parts', 'parts-sorter.onnx') }, noContext)) as ModelSummary;
    // 1000 classes, labels.txt beside it, no settings file: labels found, preprocessing guessed.
    catalog = (await service.handle({ op: 'openModel', model: path.join(FIXTURES, 'catalog', 'catalog-sorter.onnx') }, noContext)) as ModelSummary;
    // The demo model alone in a folder: no labels anywhere.
    const alone = mkdtempSync(path.join(tmpdir(), 'ff-summary-bare-'));
    copyFileSync(path.join(FIXTURES, 'parts', 'parts-sorter.onnx'), path.join(alone, 'bare.onnx'));
    bare = (await service.handle({ op: 'openModel', model: path.join(alone, 'bare.onnx') }, noContext)) as ModelSummary;
    rmSync(alone, { recursive: true, force: true });
    await service.dispose();
    // One layer marked as blocked, to show how a layer without a gradient rule reads.
    summary = { ...summary, layers: summary.layers.map((l, i) => (i === 0 ? { ...l, explainable: false, blockedBy: { opType: 'NonMaxSuppression', node: 'nms_0' } } : l)) };
    if (!existsSync(CHROMIUM)) throw new Error(`${CHROMIUM} is missing: apt-get install -y chromium`);
    profile = mkdtempSync(path.join(tmpdir(), 'ff-summary-chromium-'));
    context = await chromium.launchPersistentContext(profile, { executablePath: CHROMIUM, headless: true, args: ARGS });
    mkdirSync(SHOTS, { recursive: true });
  });
  after(async () => {
    await context?.close();
    if (profile) rmSync(profile, { recursive: true, force: true });
  });

  async function open(theme: 'vscode-light' | 'vscode-dark', html: string) {
    const page = await context.newPage();
    await page.setViewportSize({ width: 900, height: 1100 });
    const posted: unknown[] = [];
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(e.message));
    page.on('console', (m) => { if (m.type() === 'error' || m.type() === 'warning') errors.push(m.text()); });
    await page.exposeBinding('__post', (_s, m: unknown) => { posted.push(m); });
    // Plain text, so the test runner's transpiler adds no helpers to it.
    await page.addInitScript(`
      window.__csp = [];
      document.addEventListener('securitypolicyviolation', (e) => window.__csp.push(e.violatedDirective + ' ' + e.blockedURI));
      window.acquireVsCodeApi = () => ({ postMessage: (m) => window.__post(m), getState: () => undefined, setState: () => undefined });
    `);
    // The theme variables VS Code would set, inside the page's own nonce'd sheet; the body class VS Code adds.
    const themed = html.replace(/<style nonce="([^"]+)">/, `<style nonce="$1">${THEMES}`).replace('<body>', `<body class="${theme}">`);
    // Served from a routed URL (not setContent) so the init script runs before the page's own.
    await page.route('http://summary.test/', (r) => r.fulfill({ status: 200, contentType: 'text/html; charset=utf-8', body: themed }));
    await page.goto('http://summary.test/');
    return { page, posted, errors, violations: () => page.evaluate(() => (window as unknown as { __csp: string[] }).__csp) };
  }

  it('shows inputs, scores, classes, stages and why a layer cannot be explained, under its CSP', async () => {
    const html = modelSummaryHtml({ kind: 'ready', summary }, { cspSource: CSP_SOURCE, nonce: 'TestNonce123' });
    for (const theme of ['vscode-light', 'vscode-dark'] as const) {
      const { page, violations, errors } = await open(theme, html);
      const text = await page.locator('main').innerText();
      assert.match(text, /parts-sorter\.onnx/);
      assert.match(text, /\[1, 3, 112, 112\]/);
      assert.match(text, /112×112 stretch, RGB NCHW/);
      assert.match(text, /logits/);
      assert.match(text, /stage1 → stage2 → stage3 → stage4/);
      for (const c of summary.classes) assert.ok(text.includes(c), `class ${c} listed`);
      assert.match(text, /not explainable: NonMaxSuppression node nms_0 on the way to the scores has no gradient rule/);
      assert.match(text, /25, 1 not explainable/);
      assert.match(text, /explains the model, not the world/);
      assert.equal(await page.locator('tbody tr').count(), summary.layers.length);
      assert.deepEqual(await violations(), [], 'no CSP violations');
      assert.deepEqual(errors, [], 'no page errors or console warnings');
      await page.screenshot({ path: path.join(SHOTS, `model-summary-${theme.slice(7)}.png`), fullPage: true });
      await page.close();
    }
  });

  it('says where labels came from, and flags guessed preprocessing and missing labels with what to do', async () => {
    const ready = (sm: ModelSummary) => modelSummaryHtml({ kind: 'ready', summary: sm }, { cspSource: CSP_SOURCE, nonce: 'N5' });
    const given = await open('vscode-light', ready(summary));
    assert.match(await given.page.locator('main').innerText(), /labels\s+from labels\.txt, named in parts-sorter\.factfoil\.json/);
    assert.equal(await given.page.locator('[data-origin]').count(), 0, 'nothing flagged when both are given');
    await given.page.close();
    const guessed = await open('vscode-light', ready(bare));
    const text = await guessed.page.locator('main').innerText();
    assert.match(text, /preprocessing guessed from the input shape: .*Preprocessing and labels drawer \(it writes bare\.factfoil\.json beside the model\)/);
    assert.match(text, /class 0…7: no labels file found\. Put labels\.txt .* beside the model/);
    assert.ok(await guessed.page.locator('[data-origin="labels-generated"]').isVisible());
    await guessed.page.close();
  });

  it('lists 1000 classes as one scrolling list to filter by name or number, not 1000 chips', async () => {
    assert.equal(catalog.classes.length, 1000);
    const { page, errors, violations } = await open('vscode-dark', modelSummaryHtml({ kind: 'ready', summary: catalog }, { cspSource: CSP_SOURCE, nonce: 'N6' }));
    const text = await page.locator('main').innerText();
    assert.match(text, /labels\s+from labels\.txt beside the model/);
    assert.match(text, /preprocessing guessed from the input shape/);
    assert.equal(await page.locator('.classes li').count(), 0, 'no chips');
    const list = page.locator('#class-list');
    const box = await list.boundingBox();
    assert.ok(box && box.height < 400, `the list scrolls in a bounded box (${box?.height} px)`);
    await page.screenshot({ path: path.join(SHOTS, 'model-summary-1000-classes.png'), fullPage: false });
    const visible = () => page.locator('#class-list li:not([hidden])').count();
    assert.equal(await visible(), 1000);
    const name = catalog.classes[417];
    await page.fill('#class-filter', name);
    const hits = catalog.classes.filter((c) => c.toLowerCase().includes(name.toLowerCase())).length;
    assert.equal(await visible(), hits);
    await page.locator('#class-list li[data-ix="417"]').scrollIntoViewIfNeeded();
    assert.ok(await page.locator('#class-list li[data-ix="417"]').isVisible());
    const far = await page.evaluate(() => { const l = document.getElementById('class-list')!; return { sw: l.scrollWidth, cw: l.clientWidth }; });
    assert.ok(far.sw <= far.cw + 1, 'the list scrolls down, not sideways');
    assert.equal(await page.locator('#class-count').innerText(), `${hits} of 1000`);
    await page.fill('#class-filter', '999');
    assert.ok(await page.locator('#class-list li[data-ix="999"]').isVisible(), 'a class number finds its class');
    await page.fill('#class-filter', '');
    assert.equal(await visible(), 1000);
    assert.deepEqual(await violations(), []);
    assert.deepEqual(errors, []);
    await page.close();
  });

  it('asks the host for an image picker, and sends a dropped file URI; the host accepts only those messages', async () => {
    const html = modelSummaryHtml({ kind: 'ready', summary }, { cspSource: 'https://x.test', nonce: 'N2' });
    const { page, posted } = await open('vscode-light', html);
    await page.click('#pick');
    await page.evaluate(() => {
      const dt = new DataTransfer();
      dt.setData('text/uri-list', '# comment\r\nfile:///ws/washer/washer-0001.png\r\n');
      document.getElementById('drop')!.dispatchEvent(new DragEvent('drop', { dataTransfer: dt, bubbles: true, cancelable: true }));
    });
    for (let i = 0; i < 50 && posted.length < 2; i++) await new Promise((r) => setTimeout(r, 20));
    assert.deepEqual(posted, [{ type: 'pickImage' }, { type: 'explainImage', uri: 'file:///ws/washer/washer-0001.png' }]);
    assert.deepEqual(posted.map(checkEditorMessage), posted);
    assert.equal(checkEditorMessage({ type: 'explainImage', uri: '' }), undefined);
    assert.equal(checkEditorMessage({ type: 'pickImage', extra: 1 }), undefined);
    assert.equal(checkEditorMessage({ type: 'openTerminal' }), undefined);
    await page.close();
  });

  it('in Restricted Mode says why nothing is loaded, and a failure names the problem', async () => {
    const untrusted = modelSummaryHtml({ kind: 'untrusted' }, { cspSource: 'https://x.test', nonce: 'N3' });
    assert.match(untrusted, /Restricted Mode/);
    assert.match(untrusted, /id="trust"/);
    const failed = modelSummaryHtml({ kind: 'failed', message: 'model.factfoil.json: "labels" must not be <empty>', hint: 'fix or delete the model settings file' }, { cspSource: 'https://x.test', nonce: 'N4' });
    assert.match(failed, /must not be &lt;empty&gt;/, 'escaped');
    assert.match(failed, /fix or delete the model settings file/);
  });
});
