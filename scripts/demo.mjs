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

const images = [];
for (const label of readdirSync(path.join(out, 'images')).sort()) {
  const dir = path.join(out, 'images', label);
  if (!statSync(dir).isDirectory()) continue;
  for (const f of readdirSync(dir).sort()) if (f.endsWith('.png')) images.push({ label, file: path.join(dir, f) });
}
const rows = [];
for (const img of images) {
  const json = execFileSync(process.execPath, [path.join(root, 'dist/cli.js'), 'explain', img.file, '--model', model,
    '--map', 'evidence,contrast,mismatch,expectancy', '--layer', 'stages', '--json'], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'] });
  rows.push({ ...img, result: JSON.parse(json) });
}
const esc = (s) => String(s).replace(/[&<>"]/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;' })[c]);
const rel = (p) => path.relative(out, p).split(path.sep).join('/');
let html = `<!doctype html><meta charset="utf-8"><title>Factfoil demo</title>
<style>body{font:14px system-ui,sans-serif;margin:24px;background:#fafafa;color:#222}table{border-collapse:collapse}td,th{padding:4px;vertical-align:top;text-align:center}
img{width:140px;image-rendering:auto;border:1px solid #ccc}.bad{color:#b00020;font-weight:600}h2{margin-top:32px}small{color:#555}</style>
<h1>Factfoil demo: a parts-sorting line</h1>
<p>Invented scenario: small hardware parts photographed on a conveyor belt, classified by a small CNN. Each row is one stage of the network, shallow to deep.</p>
<p><small>A map explains the model, not the world. Validate maps (sanity and faithfulness checks) before relying on them, and never for safety-critical decisions without validation under the rules of that field.</small></p>`;
for (const r of rows) {
  const pred = r.result.prediction;
  const wrong = pred[0].label !== r.label;
  html += `<h2>${esc(path.basename(r.file))} — expected <b>${esc(r.label)}</b>, predicted <span class="${wrong ? 'bad' : ''}">${esc(pred[0].label)} (${(100 * pred[0].p).toFixed(1)}%)</span></h2>
<p><img src="${esc(rel(r.file))}" alt="input"> <small>${pred.slice(0, 3).map((t) => `${esc(t.label)} ${(100 * t.p).toFixed(1)}%`).join(' · ')}</small></p><table><tr><th>stage</th><th>evidence</th><th>contrast</th><th>mismatch</th><th>expectancy</th></tr>`;
  const layers = [...new Set(r.result.outputs.map((o) => o.layer))];
  for (const layer of layers) {
    html += `<tr><th>${esc(layer)}</th>`;
    for (const kind of ['evidence', 'contrast', 'mismatch', 'expectancy']) {
      const o = r.result.outputs.find((x) => x.layer === layer && x.map === kind);
      const cap = kind === 'contrast' ? `why ${o.fact}, not ${o.foil}?` : kind === 'evidence' ? `why ${o.fact}?` : '';
      html += `<td><a href="${esc(rel(o.record))}"><img src="${esc(rel(o.png))}" alt="${kind}"></a><br><small>${esc(cap)}</small></td>`;
    }
    html += '</tr>';
  }
  html += '</table>';
}
writeFileSync(path.join(out, 'index.html'), html);
console.log(`demo gallery: ${path.join(out, 'index.html')}`);
