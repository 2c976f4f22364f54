// npm run demo: explains the invented parts-sorting demo images into ./demo-output/ and writes
// an index.html gallery. The fixtures are copied first, so maps land beside the copies.
import { cpSync, rmSync, writeFileSync, readdirSync, statSync } from 'node:fs';
import { execFileSync } from 'node:child_process';
import * as path from 'node:path';

const root = path.resolve(new URL('..', import.meta.url).pathname);
const out = path.join(root, 'demo-output');
const model = path.join(root, 'test-fixtures/parts/parts-sorter.onnx');
rmSync(out, { recursive: true, force: true });
cpSync(path.join(root, 'test-fixtures/parts/demo'), path.join(out, 'images'), { recursive: true });

// One CLI run over the whole folder, as CI would call it; the failing (misclassified) images first.
const cli = (args) => JSON.parse(execFileSync(process.execPath, [path.join(root, 'dist/cli.js'), ...args, '--model', model, '--json'],
  { encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'] }));
const all = cli(['explain', path.join(out, 'images'), '--map', 'evidence,contrast,mismatch,expectancy', '--layer', 'stages']);
const rows = all.images.map((im) => ({
  file: im.image, label: im.expected, prediction: im.prediction,
  outputs: all.outputs.filter((o) => o.image === im.image),
})).sort((a, b) => Number(b.prediction[0].label !== b.label) - Number(a.prediction[0].label !== a.label));
const failing = rows.filter((r) => r.prediction[0].label !== r.label);
// The trust checks for the first failing image, against its exact object mask.
let trust = null;
if (failing.length) {
  const f = failing[0];
  const mask = path.join(root, 'test-fixtures/parts/demo-masks', f.label, path.basename(f.file));
  const report = cli(['check', f.file, '--mask', mask]);
  trust = { file: f.file, charts: readdirSync(path.dirname(f.file)).filter((n) => n.startsWith(path.basename(f.file, '.png') + '.trust.') && n.endsWith('.png')).sort(), report };
}
const esc = (s) => String(s).replace(/[&<>"]/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;' })[c]);
const rel = (p) => path.relative(out, p).split(path.sep).join('/');
let html = `<!doctype html><meta charset="utf-8"><title>Factfoil demo</title>
<style>body{font:14px system-ui,sans-serif;margin:24px;background:#fafafa;color:#222}table{border-collapse:collapse}td,th{padding:4px;vertical-align:top;text-align:center}
img{width:140px;image-rendering:auto;border:1px solid #ccc}.bad{color:#b00020;font-weight:600}h2{margin-top:32px}small{color:#555}</style>
<h1>Factfoil demo: a parts-sorting line</h1>
<p>Invented scenario: small hardware parts photographed on a conveyor belt, classified by a small CNN. Each row is one stage of the network, shallow to deep.</p>
<p>${failing.length} of ${rows.length} images are misclassified; they come first.${trust ? ' <a href="#trust">Trust checks</a> for the first one.' : ''}</p>
<p><small>A map explains the model, not the world. Validate maps (sanity and faithfulness checks) before relying on them, and never for safety-critical decisions without validation under the rules of that field.</small></p>`;
for (const r of rows) {
  const pred = r.prediction;
  const wrong = pred[0].label !== r.label;
  html += `<h2>${esc(path.basename(r.file))} — expected <b>${esc(r.label)}</b>, predicted <span class="${wrong ? 'bad' : ''}">${esc(pred[0].label)} (${(100 * pred[0].p).toFixed(1)}%)</span></h2>
<p><img src="${esc(rel(r.file))}" alt="input"> <small>${pred.slice(0, 3).map((t) => `${esc(t.label)} ${(100 * t.p).toFixed(1)}%`).join(' · ')}</small></p><table><tr><th>stage</th><th>evidence</th><th>contrast</th><th>mismatch</th><th>expectancy</th></tr>`;
  const layers = [...new Set(r.outputs.map((o) => o.layer))];
  for (const layer of layers) {
    html += `<tr><th>${esc(layer)}</th>`;
    for (const kind of ['evidence', 'contrast', 'mismatch', 'expectancy']) {
      const o = r.outputs.find((x) => x.layer === layer && x.map === kind);
      const cap = kind === 'contrast' ? `why ${o.fact}, not ${o.foil}?` : kind === 'evidence' ? `why ${o.fact}?` : kind === 'mismatch' ? 'where do all classes disagree?' : 'baseline: unusual activations';
      html += `<td><a href="${esc(rel(o.record))}"><img src="${esc(rel(o.png))}" alt="${kind}"></a><br><small>${esc(cap)}</small></td>`;
    }
    html += '</tr>';
  }
  html += '</table>';
}
if (trust) {
  html += `<h2 id="trust">Can I trust these maps? ${esc(path.basename(trust.file))}, at ${esc(trust.report.layer ?? '')}</h2>
<p><small>Weight randomization (a map that explains the model must change when its weights are destroyed), deletion and insertion (do the map's top pixels carry the prediction?), and blur and noise. Full figures: <a href="${esc(rel(path.join(path.dirname(trust.file), trust.charts[0].replace(/\.[a-z]+\.png$/, '.json'))))}">JSON</a>.</small></p>`;
  for (const c of trust.charts) html += `<p><img style="width:900px" src="${esc(rel(path.join(path.dirname(trust.file), c)))}" alt="${esc(c)}"></p>`;
}
writeFileSync(path.join(out, 'index.html'), html);
console.log(`demo gallery: ${path.join(out, 'index.html')}`);
