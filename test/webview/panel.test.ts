/**
 * The panel in headless Debian Chromium: the real bundle (dist/webview.js, built by
 * scripts/build.mjs) under a strict CSP, driven by keys and clicks, with a scripted host on the
 * other end of the message channel. Asserts on the DOM and on every message the panel sends
 * (each one must also pass the shared validator), and writes screenshots to test-output/screenshots.
 */
import { strict as assert } from 'node:assert';
import { execFileSync } from 'node:child_process';
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import type { Page } from 'playwright-core';
import { formatValue } from '../../webview/map-render';
import { Browser, OpenPanel, launchBrowser } from './harness/open-panel';
import { FLAT_NOTE } from './harness/scripted-host';
import { GEOMETRY, IMAGE_H, IMAGE_W, LABELS, MODEL, STAGES, WASHER, blobOf, idx, initMessage, rawCellValue } from './harness/synthetic-scene';

const ROOT = join(__dirname, '..', '..');
const SHOTS = join(ROOT, 'test-output', 'screenshots');

const text = (page: Page, sel: string) => page.locator(sel).first().innerText();
const currentLayer = (page: Page) => page.locator('.ff-depth-item.is-current').getAttribute('data-layer');
const shownMapId = (page: Page) => page.locator('.ff-viewer canvas.ff-overlay').getAttribute('data-map-id');

async function settle(page: Page): Promise<void> {
  await page.evaluate(() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r))));
}

/** Page coordinates of an image pixel in the main view. */
async function imagePoint(page: Page, ix: number, iy: number): Promise<{ x: number; y: number }> {
  const box = (await page.locator('.ff-viewer img.ff-image').boundingBox())!;
  return { x: box.x + ((ix + 0.5) / IMAGE_W) * box.width, y: box.y + ((iy + 0.5) / IMAGE_H) * box.height };
}

async function overlayPixel(page: Page, ix: number, iy: number): Promise<number[]> {
  return page.evaluate(([x, y]) => {
    const c = document.querySelector('.ff-viewer canvas.ff-overlay') as HTMLCanvasElement;
    return Array.from(c.getContext('2d')!.getImageData(x, y, 1, 1).data);
  }, [ix, iy]);
}

function assertClean(p: OpenPanel): void {
  assert.deepEqual(p.host.invalid, [], 'every message from the panel passes validateFromWebview');
  assert.deepEqual(p.pageErrors, [], 'no uncaught errors in the page');
  assert.deepEqual(p.consoleErrors, [], 'no console errors (CSP violations are reported there too)');
}

describe('panel in headless Chromium', function () {
  this.timeout(120_000);
  let browser: Browser;

  before(async () => {
    execFileSync(process.execPath, [join(ROOT, 'scripts', 'build.mjs')], { cwd: ROOT, stdio: 'inherit' });
    mkdirSync(SHOTS, { recursive: true });
    browser = await launchBrowser();
  });
  after(async () => { await browser?.close(); });

  it('says ready, shows the default contrast question and asks for all stages in one request', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    assert.deepEqual(host.received[0], { type: 'ready', version: 1 });
    const req = await host.waitFor('requestMaps');
    // DESIGN §2: fact = top-1 (washer); foil = the expected label (bearing) since it is misclassified.
    assert.equal(req.kind, 'contrast');
    assert.equal(req.variant, 'margin');
    assert.equal(req.fact, idx('washer'));
    assert.equal(req.foil, idx('bearing'));
    assert.deepEqual(req.layers, STAGES.map((s) => s.id));
    await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
    assert.equal(await text(page, '.ff-question-text'), 'Why washer, not bearing?');
    assert.equal(await page.locator('.ff-question-text em').count(), 2, 'class names in italics');
    // predictions: fact, foil and expected marked
    assert.match(await text(page, '.ff-pred.is-fact'), /washer[\s\S]*fact[\s\S]*62\.0%/);
    assert.match(await text(page, '.ff-pred.is-foil'), /bearing[\s\S]*foil[\s\S]*expected/);
    assert.equal(await page.locator('.ff-depth-item').count(), 4);
    assert.equal(await currentLayer(page), STAGES[3].id, 'starts at the deepest stage');
    assert.equal(await page.locator('.ff-status').isHidden(), true, 'progress gone after the final answer');
    assert.deepEqual(await page.evaluate(() => (window as unknown as { __cspViolations: string[] }).__cspViolations), []);
    assertClean(p);
    await p.close();
  });

  it('steps layers locally with keys and clicks, and foils by probability with ←/→', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
    const requestsBefore = host.ofType('requestMaps').length;
    await page.keyboard.press('ArrowUp');
    assert.equal(await currentLayer(page), STAGES[2].id);
    await page.keyboard.press('[');
    assert.equal(await currentLayer(page), STAGES[1].id);
    await page.keyboard.press(']');
    assert.equal(await currentLayer(page), STAGES[2].id);
    await page.locator(`.ff-depth-item[data-layer="${STAGES[0].id}"]`).click();
    assert.equal(await currentLayer(page), STAGES[0].id);
    await page.keyboard.press('ArrowUp');
    assert.equal(await currentLayer(page), STAGES[0].id, 'stops at the shallowest stage');
    const shown = host.sentMaps.get((await shownMapId(page))!);
    assert.equal(shown?.layer, STAGES[0].id, 'the main view shows the map the host sent for that layer');
    assert.equal(host.ofType('requestMaps').length, requestsBefore, 'stepping layers sends no request');
    assert.equal(await text(page, '.ff-where'), 'at stem, 24×24');

    // Foils in rank order, skipping the fact: bearing → hex-nut → gear; back is cached.
    await page.keyboard.press('ArrowRight');
    const r1 = await host.waitFor('requestMaps', requestsBefore + 1);
    assert.equal(r1.foil, idx('hex-nut'));
    assert.equal(await text(page, '.ff-question-text'), 'Why washer, not hex-nut?');
    await page.keyboard.press('ArrowRight');
    assert.equal((await host.waitFor('requestMaps', requestsBefore + 2)).foil, idx('gear'));
    await page.keyboard.press('ArrowLeft');
    await page.keyboard.press('ArrowLeft');
    await settle(page);
    assert.equal(await text(page, '.ff-question-text'), 'Why washer, not bearing?');
    assert.equal(host.ofType('requestMaps').length, requestsBefore + 2, 'an answered question is not asked again');
    assert.equal(await currentLayer(page), STAGES[0].id, 'the layer is kept while stepping classes');

    // Shift+→ steps the fact; the foil that collides is swapped with the old fact.
    await page.keyboard.press('Shift+ArrowRight');
    const r3 = await host.waitFor('requestMaps', requestsBefore + 3);
    assert.deepEqual([LABELS[r3.fact], LABELS[r3.foil!]], ['bearing', 'washer']);

    // "all layers" asks only for the layers not asked yet (the stages are already answered).
    await page.locator('.ff-depth .ff-check input').check();
    const r4 = await host.waitFor('requestMaps', requestsBefore + 4);
    assert.deepEqual(r4.layers, ['/block1/conv1/Conv_output_0']);
    await page.waitForFunction(() => document.querySelectorAll('.ff-depth-item:not(.is-pending)').length === 5);
    assertClean(p);
    await p.close();
  });

  it('reads the raw layer value under the pointer and paints the colour the value has', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
    await page.keyboard.press('ArrowUp'); // block2, 6×6
    const q = { kind: 'contrast' as const, variant: 'margin' as const, fact: idx('washer'), foil: idx('bearing') };
    const pt = await imagePoint(page, WASHER.x, WASHER.y);
    await page.mouse.move(pt.x, pt.y);
    // model = (image − offset) / scale; cell = floor(model / (96 / 6)), worked out here by hand.
    const mx = (WASHER.x + 0.5 - GEOMETRY.offsetX) / GEOMETRY.scaleX, my = (WASHER.y + 0.5 - GEOMETRY.offsetY) / GEOMETRY.scaleY;
    const cx = Math.floor(mx / (MODEL / 6)), cy = Math.floor(my / (MODEL / 6));
    const want = `block2 cell (${cx}, ${cy}) of 6×6: ${formatValue(rawCellValue(q, 6, cx, cy))}`;
    assert.equal(await text(page, '.ff-readout'), want);
    // Stepping with the keyboard under a still pointer reads the new layer's map there.
    await page.keyboard.press('ArrowUp');
    await page.waitForFunction((w) => document.querySelector('.ff-readout')?.textContent !== w, want);
    assert.match(await text(page, '.ff-readout'), /^block1 cell \(\d+, \d+\) of \d+×\d+: /);
    await page.keyboard.press('ArrowDown');
    await page.waitForFunction((w) => document.querySelector('.ff-readout')?.textContent === w, want);

    // Colour check against the published viridis ends (#fde725 top, #440154 bottom, from memory):
    // the blob peak is above the display range's hi (0.98·peak), so it takes the top entry;
    // the far corner of the image is ~0 and takes the bottom entry.
    const b = blobOf(q, 6);
    const peak = [Math.round(b.cx * GEOMETRY.scaleX + GEOMETRY.offsetX), Math.round(b.cy * GEOMETRY.scaleY + GEOMETRY.offsetY)];
    assert.deepEqual(await overlayPixel(page, peak[0], peak[1]), [0xfd, 0xe7, 0x25, 255]);
    assert.deepEqual(await overlayPixel(page, 2, 2), [0x44, 0x01, 0x54, 255]);
    const size = await page.evaluate(() => { const c = document.querySelector('.ff-viewer canvas.ff-overlay') as HTMLCanvasElement; return [c.width, c.height]; });
    assert.deepEqual(size, [IMAGE_W, IMAGE_H], 'overlay drawn at the image\'s own size');
    assertClean(p);
    await p.close();
  });

  it('pins two maps each with its own scale, shows probe-then-exact, saves the current and a pinned map', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
    const firstMap = (await shownMapId(page))!;
    await page.keyboard.press('p');
    assert.equal(await page.locator('.ff-pin').count(), 1);

    host.holdExact = true;
    await page.keyboard.press('3');
    const req = await host.waitFor('requestMaps', 2);
    assert.deepEqual([req.kind, req.variant], ['mismatch', 'weighted']);
    await page.waitForSelector('.ff-estimate:not([hidden])');
    assert.equal(await text(page, '.ff-estimate'), 'estimate (K=16) — refining…');
    assert.equal(await text(page, '.ff-question-text'), 'Where do all classes disagree?');
    await host.release();
    await page.waitForFunction(() => document.querySelector('.ff-estimate')?.textContent === 'exact');
    host.holdExact = false;
    const secondMap = (await shownMapId(page))!;
    assert.equal(host.sentMaps.get(secondMap)?.estimate?.mode, 'exact', 'the exact map replaced the probe');
    await page.keyboard.press('p');
    assert.equal(await page.locator('.ff-pin').count(), 2);

    // A scale per pin by default, each with its own colour bar (contrast hi ≈ 1.3, mismatch hi ≈ 0.004:
    // one scale across both would paint the mismatch pin flat).
    const hi = host.sentMaps.get(firstMap)!.range.hi;
    const hi2 = host.sentMaps.get(secondMap)!.range.hi;
    const pinHi = (n: number) => page.locator('.ff-pin').nth(n).locator('.ff-pin-legend .ff-legend-hi').innerText();
    assert.equal(await page.locator('#ff-shared-scale').isChecked(), false, 'shared scale is off by default');
    assert.deepEqual([await pinHi(0), await pinHi(1)], [formatValue(hi), formatValue(hi2)]);
    // Shared scales only join pins of one kind: a contrast and a mismatch pin keep their own.
    await page.keyboard.press('u');
    assert.equal(await page.locator('#ff-shared-scale').isChecked(), true);
    assert.deepEqual([await pinHi(0), await pinHi(1)], [formatValue(hi), formatValue(hi2)]);
    await page.keyboard.press('u');

    // Save the current map with the key; the host's answer shows with Reveal.
    await page.keyboard.press('s');
    const save = await host.waitFor('save');
    assert.equal(save.mapId, secondMap);
    assert.equal(save.colormap, 'viridis');
    await page.waitForSelector('.ff-status[data-kind="info"]');
    assert.match(await text(page, '.ff-status'), /Saved belt-0417\.mismatch\.block3\.png and its record/);
    await page.locator('.ff-status [data-action="status"]').click();
    const reveal = host.last('reveal');
    assert.equal(reveal?.path, '/work/parts/belt-0417.mismatch.block3.png');

    // Save the first pin: its map id, drawn on its own scale.
    await page.locator('.ff-pin').first().locator('[data-action="save"]').click();
    const save2 = await host.waitFor('save', 2);
    assert.equal(save2.mapId, firstMap);
    assert.deepEqual(save2.range, { lo: 0, hi });

    // Opening a pin brings its question back; Delete removes it.
    await page.locator('.ff-pin').first().locator('.ff-pin-frame').click();
    assert.equal(await text(page, '.ff-question-text'), 'Why washer, not bearing?');
    assert.equal(await shownMapId(page), firstMap);
    await page.locator('.ff-pin').nth(1).focus();
    await page.keyboard.press('Delete');
    assert.equal(await page.locator('.ff-pin').count(), 1);
    await page.locator('.ff-pin [data-action="remove"]').click();
    assert.equal(await page.locator('.ff-pin').count(), 0);
    assertClean(p);
    await p.close();
  });

  it('picks classes by typing, switches kinds and variants, and explains flat layers', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.keyboard.press('n');
    await page.keyboard.type('spr');
    assert.deepEqual(await page.locator('.ff-foil [role="option"] .ff-picker-label').allInnerTexts(), ['spring']);
    assert.equal(host.ofType('requestMaps').length, 1, 'typing in the picker does not trigger panel keys');
    await page.keyboard.press('Enter');
    const r = await host.waitFor('requestMaps', 2);
    assert.deepEqual([LABELS[r.fact], LABELS[r.foil!]], ['washer', 'spring']);

    await page.keyboard.press('f');
    await page.keyboard.type('b');
    assert.deepEqual(await page.locator('.ff-fact [role="option"] .ff-picker-label').allInnerTexts(), ['bearing', 'bolt', 'bracket']);
    await page.keyboard.press('ArrowDown');
    await page.keyboard.press('Enter');
    assert.equal(LABELS[(await host.waitFor('requestMaps', 3)).fact], 'bolt');
    assert.equal(await text(page, '.ff-question-text'), 'Why bolt, not spring?');

    await page.keyboard.press('v');
    assert.equal((await host.waitFor('requestMaps', 4)).variant, 'loss');
    await page.keyboard.press('1');
    const ev = await host.waitFor('requestMaps', 5);
    assert.deepEqual([ev.kind, ev.foil], ['evidence', undefined]);
    assert.equal(await text(page, '.ff-question-text'), 'Why bolt?');

    // mismatch, gradient variant: the host's note about the last stage is shown with the map
    // An all-class sweep asks for the shown layer alone first, then the other stages in one request.
    await page.keyboard.press('3');
    const shownFirst = await host.waitFor('requestMaps', 6);
    assert.deepEqual(shownFirst.layers, [STAGES[STAGES.length - 1].id]);
    assert.deepEqual((await host.waitFor('requestMaps', 7)).layers, STAGES.slice(0, -1).map((s) => s.id));
    await page.keyboard.press('v');
    assert.equal((await host.waitFor('requestMaps', 8)).variant, 'gradient');
    await host.waitFor('requestMaps', 9);
    await page.waitForFunction((note) => document.querySelector('.ff-note')?.textContent === note, FLAT_NOTE);
    await page.waitForFunction(() => document.querySelectorAll('.ff-depth-item.is-flat').length === 1);
    // → from the mismatch view opens a per-class map: contrast, loss variant (DESIGN §4)
    await page.keyboard.press('ArrowRight');
    const per = await host.waitFor('requestMaps', 10);
    assert.deepEqual([per.kind, per.variant], ['contrast', 'loss']);

    // detail maps live at the input: the strip shows what the host answered
    await page.keyboard.press('5');
    await host.waitFor('requestMaps', 11);
    await page.waitForSelector('.ff-depth-item[data-layer="input"]');
    assert.equal(await page.locator('.ff-depth-item').count(), 1);
    assert.match(await text(page, '.ff-question-text'), /^Which fine detail drives bolt\?$/);
    assertClean(p);
    await p.close();
  });

  it('mismatch over many classes: the shown layer first with percent and time left, a stepped-to layer queued, then the rest', async () => {
    const p = await browser.open('vscode-light', { width: 1400, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    host.manualMaps = true;
    const deepest = STAGES[STAGES.length - 1];
    const before = STAGES[STAGES.length - 2];
    await page.keyboard.press('3');
    const first = await host.waitFor('requestMaps', 2);
    assert.deepEqual(first.layers, [deepest.id], 'the shown layer alone first');
    assert.equal(await text(page, '#ff-status .ff-status-text'), `Computing the map at ${deepest.short}…`);
    await host.send({ type: 'progress', id: first.id, done: 2, total: 8, message: 'Computing: exact sweep over all 1000 classes' });
    await new Promise((r) => setTimeout(r, 700));
    await host.send({ type: 'progress', id: first.id, done: 4, total: 8, message: 'Computing: exact sweep over all 1000 classes' });
    // 2 steps in ~0.7 s, 4 to go: about 2 s left (rounded up); the percent is the host's done/total.
    await page.waitForFunction(() => /50%/.test(document.querySelector('#ff-status .ff-status-text')?.textContent ?? ''));
    assert.match(await text(page, '#ff-status .ff-status-text'), /^Computing: exact sweep over all 1000 classes · 50% · about [1-3] s left$/);
    // Stepping to a layer not asked yet: it waits behind the running request, and says so.
    await page.keyboard.press('ArrowUp');
    await page.waitForFunction(() => /queued/.test(document.querySelector('#ff-status .ff-status-text')?.textContent ?? ''));
    assert.match(await text(page, '#ff-status .ff-status-text'), new RegExp(`· then ${before.short} \\(queued\\)$`));
    assert.equal(host.ofType('requestMaps').length, 2, 'nothing new asked while one runs');
    assert.equal(await page.locator('.ff-overlay-placeholder').getAttribute('data-state'), 'queued');
    assert.equal(await page.locator(`.ff-depth-item[data-layer="${before.id}"]`).getAttribute('class'), 'ff-depth-item is-current is-queued');
    await page.screenshot({ path: join(SHOTS, 'panel-queued-light-1400.png') });
    // The first answer arrives: the queued layer is asked next, alone; then the remaining stages.
    await host.answer(first);
    const second = await host.waitFor('requestMaps', 3);
    assert.deepEqual(second.layers, [before.id]);
    await host.answer(second);
    const rest = await host.waitFor('requestMaps', 4);
    assert.deepEqual(rest.layers, STAGES.slice(0, -2).map((s) => s.id));
    await host.answer(rest);
    await page.waitForSelector('#ff-status[data-kind="idle"]', { state: 'attached' });
    assert.equal(await page.locator('.ff-depth-item.is-queued, .ff-depth-item.is-pending').count(), 0);
    assertClean(p);
    await p.close();
  });

  it('a failed open leaves no half-built panel: its own title, no badges, actions off, the whole error wrapped', async () => {
    const long = 'Cannot open belt-0417.png with parts-sorter.onnx: the model\'s node /block2/conv/Conv (op Conv) reads initializer block2.weight, which the file does not contain; the file may be truncated or exported with external data left behind';
    const hint = 'Export the model again with its weights inside the .onnx file, or keep the external data file beside it, then open the panel again (command: Factfoil: Explain Image with Factfoil…).';
    const p = await browser.open('vscode-light', { width: 700, height: 900 }, { message: long, hint });
    const { page, host } = p;
    assert.equal(await text(page, '#ff-title'), 'Not opened');
    assert.equal(await text(page, '#ff-question'), 'This model and image could not be opened.');
    assert.equal(await page.locator('.ff-estimate').isHidden(), true);
    assert.equal(await page.locator('#ff-origin').isHidden(), true);
    for (const sel of ['#ff-pin', '#ff-save', '#ff-open-settings', 'button[data-kind="mismatch"]', '#ff-fact', '#ff-foil', '#ff-trust-run', '#ff-trust-save']) {
      assert.equal(await page.locator(sel).isDisabled(), true, `${sel} is disabled`);
    }
    // The whole message and its hint are on screen: wrapped, not cut.
    assert.equal(await text(page, '#ff-status .ff-status-text'), long);
    assert.equal(await text(page, '#ff-status .ff-status-hint'), hint);
    const cut = await page.locator('#ff-status .ff-status-text, #ff-status .ff-status-hint').evaluateAll((els) => els.filter((e) => e.scrollWidth > e.clientWidth + 1).length);
    assert.equal(cut, 0, 'no text cut off');
    await page.keyboard.press('3');
    await page.keyboard.press('p');
    assert.equal(host.ofType('requestMaps').length, 0, 'keys ask nothing');
    await page.screenshot({ path: join(SHOTS, 'panel-open-failed-light-700.png') });
    assertClean(p);
    await p.close();
  });

  it('flags guessed preprocessing and generated labels with the way to fix them; GRAY shows for a one-channel model', async () => {
    const p = await browser.open('vscode-dark', { width: 1400, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    assert.equal(await page.locator('#ff-origin').isHidden(), true, 'no flag without a guess');
    const init = await initMessage();
    await host.send({ ...init, origin: { preprocessing: 'guessed', labels: 'generated' }, gray: true });
    await page.waitForSelector('#ff-origin:not([hidden])');
    assert.match(await text(page, '#ff-origin'), /Preprocessing is guessed from the model's input shape[\s\S]*No labels were found, so classes read "class 0"/);
    await page.screenshot({ path: join(SHOTS, 'panel-guessed-dark-1400x900.png') });
    await page.click('#ff-origin-fix');
    await page.waitForSelector('dialog#ff-drawer[open]');
    assert.equal(await page.locator('select[name="channels"]').inputValue(), 'GRAY');
    assert.deepEqual(await page.locator('select[name="channels"] option').allTextContents(), ['RGB', 'BGR', 'GRAY']);
    await page.click('#ff-drawer-apply');
    const upd = await host.waitFor('updateSettings');
    assert.equal(upd.settings.preprocessing.channels, init.settings.preprocessing.channels, 'the order sent back is the one the host gave');
    // The host answers with preprocessing and labels from the new sidecar: the flag goes.
    await page.waitForSelector('#ff-origin[hidden]', { state: 'attached' });
    assertClean(p);
    await p.close();
  });

  it('the foil picker lists the fact but will not take it, so the question and the value agree', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.click('#ff-foil');
    await page.fill('#ff-foil', 'wash');
    const option = page.locator('[aria-label="Foil classes"] [role=option]', { hasText: 'washer' });
    assert.equal(await option.getAttribute('aria-disabled'), 'true');
    assert.match(await option.innerText(), /fact/);
    await option.dispatchEvent('mousedown');
    await page.keyboard.press('Enter');
    await settle(page);
    assert.equal(await page.locator('#ff-foil').inputValue(), 'bearing', 'the foil stays what the question says');
    assert.equal(await text(page, '#ff-question'), 'Why washer, not bearing?');
    assert.equal(host.ofType('requestMaps').length, 1, 'nothing asked');
    assertClean(p);
    await p.close();
  });

  it('shows progress with Cancel, one-line errors with hints, and drops malformed host messages', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
    host.stallNext = true;
    await page.keyboard.press('ArrowRight');
    const stalled = await host.waitFor('requestMaps', 2);
    // The row first says 'Computing maps…' on its own; the host's progress message follows.
    await page.waitForFunction(() => /Exact sweep: seed chunk 1 of 4/.test(document.querySelector('.ff-status[data-kind="progress"]')?.textContent ?? ''));
    assert.equal(await page.locator('.ff-status progress').evaluate((e) => (e as HTMLProgressElement).value), 0.25);
    await page.locator('.ff-status [data-action="cancel"]').click();
    assert.equal(host.last('cancel')?.id, stalled.id);
    assert.equal(await text(page, '.ff-status-text'), 'Cancelled.');

    host.failNext = { message: "Layer '/block3/add/Add_output_0' has no gradient rule for op 'Einsum'", hint: 'pick a shallower layer' };
    await page.keyboard.press('ArrowRight');
    await page.waitForSelector('.ff-status[data-kind="error"]');
    assert.match(await text(page, '.ff-status'), /no gradient rule for op 'Einsum'[\s\S]*pick a shallower layer/);

    const logsBefore = host.ofType('log').length;
    const shown = await shownMapId(page);
    await host.send({ type: 'mapsResult', id: 1, maps: [{ mapId: 'evil', kind: 'contrast' }], final: true } as Record<string, unknown>);
    await host.send({ type: 'init', version: 1 });
    const log = await host.waitFor('log', logsBefore + 2);
    assert.match(log.message, /dropped a malformed message: message\.\w+/);
    assert.equal(await shownMapId(page), shown, 'nothing changed');
    assert.equal(host.ofType('log').filter((l) => l.level === 'error').length, 0);
    assertClean(p);
    await p.close();
  });

  it('edits preprocessing and labels in the drawer and sends one update, keeping the foil the user chose', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.keyboard.press('ArrowRight'); // the next foil by probability: hex-nut
    const picked = await host.waitFor('requestMaps', 2);
    assert.equal(picked.foil, idx('hex-nut'));
    // The page is sandboxed like VS Code's webview without allow-forms: a form's submit never
    // reaches its handler (HTML, form submission algorithm: sandboxed forms flag). The canary
    // shows the harness really blocks it, so the drawer cannot rely on a form.
    const canary = await page.evaluate(() => {
      const f = document.createElement('form');
      f.method = 'dialog';
      let fired = false;
      f.addEventListener('submit', (e) => { fired = true; e.preventDefault(); });
      document.body.append(f);
      f.requestSubmit();
      f.remove();
      return fired;
    });
    assert.equal(canary, false, 'the harness blocks form submission as the editor does');
    p.consoleErrors.splice(0, p.consoleErrors.length, ...p.consoleErrors.filter((e) => !/allow-forms/.test(e)));
    await page.keyboard.press(',');
    await page.waitForSelector('dialog.ff-drawer[open]');
    assert.equal(await page.locator('dialog#ff-drawer form').count(), 0, 'no form in the drawer');
    assert.equal(await page.locator('input[name="width"]').inputValue(), String(MODEL));
    await page.locator('select[name="resize"]').selectOption('crop');
    await page.locator('select[name="preset"]').selectOption({ label: 'Symmetric: x / 127.5 − 1' });
    await page.getByRole('button', { name: 'Browse…' }).click();
    await page.waitForFunction(() => (document.querySelector('input[name="labelsFile"]') as HTMLInputElement).value === '/work/parts/labels-v2.txt');
    await page.locator('input[name="std0"]').fill('0');
    await page.getByRole('button', { name: 'Apply' }).click();
    assert.equal(await text(page, '.ff-form-error'), 'Std must be a positive number', 'bad input is refused in the form');
    await page.locator('input[name="std0"]').fill('1');
    await page.screenshot({ path: join(SHOTS, 'panel-settings-light.png') });
    await page.getByRole('button', { name: 'Apply' }).click();
    const upd = await host.waitFor('updateSettings');
    assert.deepEqual(upd.settings, {
      preprocessing: { width: MODEL, height: MODEL, resize: 'crop', channels: 'RGB', layout: 'NCHW', scale: 1 / 127.5, mean: [1, 1, 1], std: [1, 1, 1] },
      labelsFile: '/work/parts/labels-v2.txt',
    });
    // the host answers with the new prediction; the panel asks for the maps again, for the same foil
    const again = await host.waitFor('requestMaps', 3);
    assert.equal(again.foil, idx('hex-nut'), 'new settings keep the foil the user picked');
    assert.equal(again.fact, idx('washer'));
    await page.waitForFunction(() => /55\.0%/.test(document.querySelector('.ff-pred.is-fact')?.textContent ?? ''));
    assert.match(await text(page, '#ff-trust'), /contrast with hex-nut/, 'the trust line names the same foil');
    assertClean(p);
    await p.close();
  });

  it('lists the keys with ?, and stays usable at 360 px', async () => {
    const p = await browser.open('vscode-dark', { width: 360, height: 800 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
    const overflow = await page.evaluate(() => document.documentElement.scrollWidth - document.documentElement.clientWidth);
    assert.ok(overflow <= 0, `no horizontal scrolling at 360 px (overflow ${overflow} px)`);
    await page.keyboard.press('?');
    await page.waitForSelector('dialog.ff-keys[open]');
    assert.match(await text(page, 'dialog.ff-keys'), /Deeper layer[\s\S]*Next foil by probability[\s\S]*Pin the current map/);
    await page.screenshot({ path: join(SHOTS, 'panel-keys-dark-360.png') });
    await page.keyboard.press('Escape');
    assert.equal(await page.locator('dialog.ff-keys[open]').count(), 0);
    assertClean(p);
    await p.close();
  });

  for (const theme of ['vscode-light', 'vscode-dark'] as const) {
    it(`at 1400×900 (${theme}) the legend and the depth strip are in view without scrolling, and progress moves nothing`, async () => {
      const p = await browser.open(theme, { width: 1400, height: 900 });
      const { page, host } = p;
      await host.waitFor('requestMaps');
      await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
      await settle(page);
      const bottom = (sel: string) => page.locator(sel).evaluate((e) => e.getBoundingClientRect().bottom);
      for (const sel of ['#ff-legend', '#ff-depth .ff-depth-list']) {
        const b = await bottom(sel);
        assert.ok(b <= 900, `${sel} ends at ${b.toFixed(0)} px, below the fold`);
      }
      await page.screenshot({ path: join(SHOTS, `panel-${theme.replace('vscode-', '')}-1400x900.png`) });
      // The progress row has its place while idle: nothing below it moves when progress shows.
      const top = () => page.locator('.ff-viewer').evaluate((e) => e.getBoundingClientRect().top);
      const idleTop = await top();
      host.stallNext = true;
      await page.keyboard.press('ArrowRight');
      await page.waitForSelector('#ff-status[data-kind="progress"]');
      assert.equal(await top(), idleTop, 'the view did not jump');
      assertClean(p);
      await p.close();
    });
  }

  for (const [theme, width] of [['vscode-light', 1000], ['vscode-dark', 1000], ['vscode-high-contrast', 1000], ['vscode-light', 360], ['vscode-dark', 360], ['none', 700]] as const) {
    it(`screenshot: ${theme} at ${width} px`, async () => {
      const p = await browser.open(theme, { width, height: 900 });
      const { page, host } = p;
      await host.waitFor('requestMaps');
      await page.waitForSelector('.ff-viewer canvas.ff-overlay[data-map-id]');
      await page.keyboard.press('p');
      await page.keyboard.press('ArrowUp');
      await page.keyboard.press('p');
      host.holdExact = true;
      await page.keyboard.press('3');
      await page.waitForSelector('.ff-estimate:not([hidden])');
      const pt = await imagePoint(page, WASHER.x, WASHER.y);
      await page.mouse.move(pt.x, pt.y);
      await settle(page);
      await page.screenshot({ path: join(SHOTS, `panel-${theme.replace('vscode-', '')}-${width}.png`), fullPage: true });
      await host.release();
      assertClean(p);
      await p.close();
    });
  }
});
