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
import { faithfulnessVerdict } from '../../webview/trust-verdict';
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
    await host.send({ type: 'trustProgress', id: req.id, done: 3, total: 12, message: `sanity: randomized logits, ${deepest.id}` });
    await page.waitForSelector('.ff-trust-status[data-kind="progress"]');
    // Step words and whole step numbers, not tensor names (the deepest stage shows by its short name).
    assert.equal(await text(page, '.ff-trust-status .ff-status-text'), `Weight randomization: down to ${deepest.short} (2 blocks) (step 4 of 12)`);
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
      // No box: the host scores against the image's mask file and names it.
      await page.check('#ff-trust-truth');
      await page.click('[data-action="run-trust"]');
      const req = await host.waitFor('requestTrust');
      assert.equal(req.box, undefined);
      assert.equal(await page.locator('#ff-trust-save').isDisabled(), true, 'nothing to save before a report');
      await host.send({ type: 'trustResult', id: req.id, report: { ...report, layer: req.layer }, maskName: 'washer-0001.mask.png' });
      await page.waitForSelector('.ff-trust-figure[data-test="robustness"]');
      // Every check carries a verdict with its rule; faithfulness agrees with the rule applied here.
      const verdicts = await page.locator('.ff-trust-figure').evaluateAll((els) => els.map((e) => e.getAttribute('data-verdict')));
      assert.ok(verdicts.every((v) => v === 'passed' || v === 'doubtful' || v === 'failed'), `verdicts ${verdicts}`);
      assert.equal(await page.locator('[data-test="faithfulness"]').getAttribute('data-verdict'), faithfulnessVerdict(report)!.verdict);
      assert.match(await text(page, '[data-test="faithfulness"] .ff-verdict-rule'), /^Rule: Passed when the deletion area is at least 0\.05 below/);
      assert.match(await text(page, '[data-test="truth"] figcaption'), /^Scores against the mask file washer-0001\.mask\.png:/);
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
      // Series colours are our own set, not the theme's (whose orange and yellow nearly coincide):
      // every pair of map kinds differs clearly. Distance in RGB over 100 of 441: common practice, no source.
      const styles = await page.evaluate(() => {
        const svg = document.createElementNS('http://www.w3.org/2000/svg', 'svg');
        document.querySelector('.ff-trust-charts')!.append(svg);
        const out = [0, 1, 2, 3, 4].map((i) => {
          const line = document.createElementNS('http://www.w3.org/2000/svg', 'polyline');
          line.setAttribute('class', `ff-chart-line ff-series-${i}`);
          svg.append(line);
          const cs = getComputedStyle(line);
          return { stroke: cs.stroke, dash: cs.strokeDasharray };
        });
        svg.remove();
        return out;
      });
      const rgbOf = (c: string) => c.match(/\d+/g)!.map(Number);
      for (let i = 0; i < styles.length; i++) for (let j = i + 1; j < styles.length; j++) {
        const [a, b] = [rgbOf(styles[i].stroke), rgbOf(styles[j].stroke)];
        const d = Math.hypot(a[0] - b[0], a[1] - b[1], a[2] - b[2]);
        assert.ok(d > 100, `series ${i} ${styles[i].stroke} and ${j} ${styles[j].stroke} are too close (${d.toFixed(0)})`);
      }
      // Contrast (slot 1) and gradient (slot 4) also differ by their dashes.
      assert.notEqual(styles[1].dash, styles[4].dash);
      // Save: the charts go to the host as PNGs with the id of the report they belong to.
      await page.click('#ff-trust-save');
      const save = await host.waitFor('saveTrust');
      assert.equal(save.trustId, req.id);
      assert.deepEqual(save.charts.map((c) => c.name), ['faithfulness', 'sanity', 'robustness']);
      for (const c of save.charts) assert.equal(Buffer.from(c.png, 'base64').subarray(1, 4).toString('latin1'), 'PNG', `${c.name} chart is a PNG`);
      await host.send({ type: 'saveResult', id: save.id, files: ['/work/parts/washer-0001.trust.stage4.washer.json'], message: 'Saved the trust report washer-0001.trust.stage4.washer.json and 3 charts beside the image.' });
      await page.waitForSelector('.ff-trust-status[data-kind="info"]');
      assert.match(await text(page, '.ff-trust-status'), /Saved the trust report/);
      await page.locator('.ff-trust').scrollIntoViewIfNeeded();
      await page.locator('.ff-trust').screenshot({ path: join(SHOTS, `trust-${theme.replace('vscode-', '')}.png`) });
      assertClean(p);
      await p.close();
    });
  }
});
