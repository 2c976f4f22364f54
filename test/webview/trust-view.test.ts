/**
 * The "Can I trust this map?" view in headless Chromium: the real bundle under the strict CSP,
 * with a scripted peer that answers requestTrust the way the host is specified to (progress,
 * then a report or `failed`). The report it sends is computed here by runTrustChecks on the
 * demo model, so the charts show real curves. Screenshots (light and dark) go to
 * test-output/screenshots.
 */
import { strict as assert } from 'node:assert';
import { execFileSync } from 'node:child_process';
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import type { Page } from 'playwright-core';
import { Browser, OpenPanel, launchBrowser } from './harness/open-panel';
import { STAGES, idx } from './harness/synthetic-scene';
import { Engine } from '../../core/engine/engine';
import { openModel } from '../../core/workflow/open-model';
import { imageInput } from '../../core/workflow/model-input';
import { regionFor, runTrustChecks } from '../../core/trust/run';
import type { TrustReport } from '../../core/trust/report';
import { FIXTURES } from '../helpers';

const ROOT = join(__dirname, '..', '..');
const SHOTS = join(ROOT, 'test-output', 'screenshots');
const PARTS = join(FIXTURES, 'parts');

async function demoReport(): Promise<TrustReport> {
  const engine = new Engine();
  try {
    const ctx = await openModel(engine, join(PARTS, 'parts-sorter.onnx'));
    const input = await imageInput(ctx, join(PARTS, 'eval/washer', 'washer-0001.png'));
    const region = await regionFor({ maskFile: join(PARTS, 'eval-masks/washer/washer-0001.png') }, { width: 112, height: 112 });
    return await runTrustChecks(engine, ctx.pm, { data: input.data, layout: 'NCHW', geometry: input.geometry }, {
      kinds: ['evidence', 'contrast', 'detail', 'gradient'], region, fact: idx('washer'), foil: idx('bearing'),
      sanity: { independent: 2 }, faithfulness: { steps: 25, randomOrders: 2 },
    });
  } finally {
    await engine.dispose();
  }
}

function assertClean(p: OpenPanel): void {
  assert.deepEqual(p.host.invalid, [], 'every message from the panel passes validateFromWebview');
  assert.deepEqual(p.pageErrors, [], 'no uncaught errors in the page');
  assert.deepEqual(p.consoleErrors, [], 'no console errors (CSP violations are reported there too)');
}

const text = (page: Page, sel: string) => page.locator(sel).first().innerText();

describe('trust view in headless Chromium', function () {
  this.timeout(120_000);
  let browser: Browser;
  let report: TrustReport;

  before(async () => {
    execFileSync(process.execPath, [join(ROOT, 'scripts', 'build.mjs')], { cwd: ROOT, stdio: 'inherit' });
    mkdirSync(SHOTS, { recursive: true });
    [browser, report] = await Promise.all([launchBrowser(), demoReport()]);
  });
  after(async () => { await browser?.close(); });

  it('asks for the panel\'s own question, shows progress, and cancels by id', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    const deepest = STAGES[STAGES.length - 1];
    await page.waitForFunction(() => /Checks the maps at/.test(document.querySelector('.ff-trust-target')?.textContent ?? ''));
    // The panel starts on the deepest stage with the top prediction as the fact.
    assert.match(await text(page, '.ff-trust-target'), new RegExp(`at ${deepest.short} for washer \\(contrast with bearing\\)`));
    await page.click('[data-action="run-trust"]');
    const req = await host.waitFor('requestTrust');
    assert.deepEqual({ ...req, id: 0 }, { type: 'requestTrust', id: 0, layer: deepest.id, fact: idx('washer'), foil: idx('bearing'), tests: ['sanity', 'faithfulness', 'robustness'] });
    assert.equal(await page.locator('[data-action="run-trust"]').isDisabled(), true, 'one run at a time');
    await host.send({ type: 'trustProgress', id: req.id, done: 3, total: 12, message: 'sanity: randomized logits, stage4' });
    await page.waitForSelector('.ff-trust-status[data-kind="progress"]');
    assert.match(await text(page, '.ff-trust-status'), /randomized logits, stage4/);
    assert.equal(await page.locator('.ff-trust progress').evaluate((e) => (e as HTMLProgressElement).value), 0.25);
    await page.click('.ff-trust-status [data-action="cancel"]');
    assert.deepEqual(await host.waitFor('cancel'), { type: 'cancel', id: req.id });
    await host.send({ type: 'failed', id: req.id, message: 'cancelled', cancelled: true });
    await page.waitForSelector('.ff-trust-status[data-kind="info"]');
    assert.match(await text(page, '.ff-trust-status'), /Checks cancelled/);
    // A message for another request id is not ours: ignored.
    await host.send({ type: 'trustResult', id: req.id + 50, report });
    assert.equal(await page.locator('.ff-trust-figure').count(), 0);
    assertClean(p);
    await p.close();
  });

  it('follows the panel when the layer changes, and sends the box for the truth check', async () => {
    const p = await browser.open('vscode-light', { width: 1000, height: 900 });
    const { page, host } = p;
    await host.waitFor('requestMaps');
    await page.keyboard.press('ArrowUp');
    await page.waitForFunction((s) => document.querySelector('.ff-trust-target')?.textContent?.includes(`at ${s} for`), STAGES[2].short);
    assert.equal(await page.locator('#ff-trust-truth').isChecked(), false);
    for (const [k, v] of [['x', '150'], ['y', '90'], ['width', '100'], ['height', '80']]) await page.fill(`[data-box="${k}"]`, v);
    assert.equal(await page.locator('#ff-trust-truth').isChecked(), true, 'marking a box turns the truth check on');
    await page.click('[data-action="run-trust"]');
    const req = await host.waitFor('requestTrust');
    assert.equal(req.layer, STAGES[2].id);
    assert.deepEqual(req.tests, ['sanity', 'faithfulness', 'truth', 'robustness']);
    assert.deepEqual(req.box, { x: 150, y: 90, width: 100, height: 80 });
    await host.send({ type: 'failed', id: req.id, message: 'the box covers no pixel of the 320×240 image', hint: 'check the box coordinates' });
    await page.waitForSelector('.ff-trust-status[data-kind="error"]');
    assert.match(await text(page, '.ff-trust-status'), /covers no pixel[\s\S]*check the box/);
    assertClean(p);
    await p.close();
  });

  for (const theme of ['vscode-light', 'vscode-dark'] as const) {
    it(`draws the report: charts per check with their explanations and the caution (${theme}, screenshot)`, async () => {
      const p = await browser.open(theme, { width: 1000, height: 900 });
      const { page, host } = p;
      for (const [k, v] of [['x', '150'], ['y', '90'], ['width', '100'], ['height', '80']]) await page.fill(`[data-box="${k}"]`, v);
      await page.click('[data-action="run-trust"]');
      const req = await host.waitFor('requestTrust');
      await host.send({ type: 'trustResult', id: req.id, report: { ...report, layer: req.layer } });
      await page.waitForSelector('.ff-trust-figure[data-test="robustness"]');
      const figures = await page.locator('.ff-trust-figure').evaluateAll((els) => els.map((e) => e.getAttribute('data-test')));
      assert.deepEqual(figures, ['sanity', 'faithfulness', 'truth', 'robustness']);
      // Cascade: one line per kind; faithfulness: per chart one line per kind plus the random baselines.
      assert.equal(await page.locator('[data-test="sanity"] svg').count(), 2, 'cascade and one-block charts');
      assert.equal(await page.locator('[data-test="sanity"] svg').first().locator('polyline').count(), 4);
      assert.equal(await page.locator('[data-test="faithfulness"] svg').count(), 2);
      assert.equal(await page.locator('[data-test="faithfulness"] svg').first().locator('polyline').count(), 4 + 2);
      const legend = await page.locator('[data-test="faithfulness"] svg').first().locator('.ff-chart-legend').allTextContents();
      assert.deepEqual(legend, [
        `evidence ${report.faithfulness!.maps.evidence!.deletion.auc.toFixed(2)}`, `contrast ${report.faithfulness!.maps.contrast!.deletion.auc.toFixed(2)}`,
        `detail ${report.faithfulness!.maps.detail!.deletion.auc.toFixed(2)}`, `gradient ${report.faithfulness!.maps.gradient!.deletion.auc.toFixed(2)}`,
        `random (grid) ${report.faithfulness!.random.layer_grid.deletion.auc.toFixed(2)}`, `random ${report.faithfulness!.random.pixels.deletion.auc.toFixed(2)}`,
      ]);
      assert.match(await text(page, '[data-test="sanity"] figcaption'), /from the scores down/);
      assert.match(await text(page, '[data-test="faithfulness"] .ff-trust-figures'), /evidence \d\.\d\d \/ \d\.\d\d \(random/);
      assert.equal(await page.locator('.ff-trust-table tbody tr').count(), 4);
      assert.match(await text(page, '.ff-trust-caution'), /explains the model, not the world/);
      // Series colours come from the theme: the evidence line is drawn in --vscode-charts-blue.
      const stroke = await page.locator('[data-test="sanity"] polyline.ff-series-0').first().evaluate((e) => getComputedStyle(e).stroke);
      const blue = await page.evaluate(() => getComputedStyle(document.body).getPropertyValue('--vscode-charts-blue').trim());
      const rgb = (hex: string) => `rgb(${[1, 3, 5].map((i) => parseInt(hex.slice(i, i + 2), 16)).join(', ')})`;
      assert.equal(stroke, rgb(blue));
      await page.locator('.ff-trust').scrollIntoViewIfNeeded();
      await page.locator('.ff-trust').screenshot({ path: join(SHOTS, `trust-${theme.replace('vscode-', '')}.png`) });
      assertClean(p);
      await p.close();
    });
  }
});
