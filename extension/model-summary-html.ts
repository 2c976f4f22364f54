/**
 * The read-only view of a `.onnx` file (the custom editor): inputs and preprocessing, the scores
 * tensor, classes, stages, which layers can be explained and why not, and a way to pick or drop
 * an image to explain with this model. Built as one HTML string under the shared CSP; its few
 * lines of script only post two kinds of message, checked by checkEditorMessage. No vscode import.
 */
import * as path from 'node:path';
import type { ModelSummary, LayerSummary } from '../core/engine-process/protocol';
import { escapeHtml as e, webviewCsp } from './webview-html';

export type EditorState =
  | { kind: 'loading' }
  | { kind: 'untrusted' }
  | { kind: 'failed'; message: string; hint?: string }
  | { kind: 'ready'; summary: ModelSummary };

export type EditorMessage = { type: 'pickImage' } | { type: 'explainImage'; uri: string } | { type: 'trustWorkspace' };

/** Messages the summary page may send; anything else is dropped by the host. */
export function checkEditorMessage(m: unknown): EditorMessage | undefined {
  if (typeof m !== 'object' || m === null) return undefined;
  const o = m as Record<string, unknown>;
  const keys = Object.keys(o).sort().join(',');
  if ((o.type === 'pickImage' || o.type === 'trustWorkspace') && keys === 'type') return { type: o.type };
  if (o.type === 'explainImage' && keys === 'type,uri' && typeof o.uri === 'string' && o.uri.length > 0 && o.uri.length <= 4096) return { type: 'explainImage', uri: o.uri };
  return undefined;
}

const STYLE = `
:root { color-scheme: light dark; }
body { font-family: var(--vscode-font-family, system-ui, sans-serif); font-size: var(--vscode-font-size, 13px); color: var(--vscode-foreground, #222);
  background: var(--vscode-editor-background, #fff); margin: 0; padding: 16px 24px 32px; line-height: 1.45; }
h1 { font-size: 1.5em; font-weight: 600; margin: 0 0 2px; }
h2 { font-size: 1.05em; font-weight: 600; margin: 24px 0 8px; text-transform: none; }
.sub { color: var(--vscode-descriptionForeground, #666); margin: 0; word-break: break-all; }
.grid { display: grid; grid-template-columns: max-content 1fr; gap: 4px 16px; margin: 0; }
.grid dt { color: var(--vscode-descriptionForeground, #666); }
.grid dd { margin: 0; font-family: var(--vscode-editor-font-family, monospace); word-break: break-all; }
.actions { display: flex; flex-wrap: wrap; gap: 12px; align-items: center; margin: 16px 0 4px; }
button { font: inherit; color: var(--vscode-button-foreground, #fff); background: var(--vscode-button-background, #0e639c);
  border: 1px solid var(--vscode-button-border, transparent); padding: 5px 14px; border-radius: 2px; cursor: pointer; }
button:hover { background: var(--vscode-button-hoverBackground, #1177bb); }
button:focus-visible { outline: 1px solid var(--vscode-focusBorder, #0078d4); outline-offset: 2px; }
.drop { flex: 1 1 260px; border: 1px dashed var(--vscode-panel-border, #999); border-radius: 4px; padding: 10px 14px;
  color: var(--vscode-descriptionForeground, #666); }
.drop.is-over { border-color: var(--vscode-focusBorder, #0078d4); background: var(--vscode-list-hoverBackground, rgba(0,0,0,.05)); }
.classes { display: flex; flex-wrap: wrap; gap: 6px; padding: 0; margin: 0; list-style: none; }
.classes li { border: 1px solid var(--vscode-panel-border, #ccc); border-radius: 10px; padding: 1px 9px; }
.class-list { list-style: none; margin: 6px 0 0; max-height: 18em; overflow-y: auto; display: grid; grid-template-columns: repeat(auto-fill, minmax(16em, 1fr));
  gap: 1px 12px; align-content: start; border: 1px solid var(--vscode-panel-border, #ccc); border-radius: 3px; padding: 4px 8px; }
.class-list li { overflow-wrap: anywhere; }
.class-list li[hidden] { display: none; }
.class-find { display: flex; gap: 10px; align-items: center; }
input[type=search] { font: inherit; color: var(--vscode-input-foreground, inherit); background: var(--vscode-input-background, transparent);
  border: 1px solid var(--vscode-input-border, #999); padding: 3px 6px; min-width: 24em; }
input[type=search]:focus-visible { outline: 1px solid var(--vscode-focusBorder, #0078d4); outline-offset: -1px; }
.guess { color: var(--vscode-editorWarning-foreground, #9a6700); font-family: var(--vscode-font-family, system-ui, sans-serif); word-break: normal; overflow-wrap: anywhere; }
.classes .ix, .class-list .ix { color: var(--vscode-descriptionForeground, #666); margin-right: 4px; font-variant-numeric: tabular-nums; }
table { border-collapse: collapse; width: 100%; }
th, td { text-align: left; padding: 3px 10px 3px 0; border-bottom: 1px solid var(--vscode-panel-border, #ddd); vertical-align: top; }
th { font-weight: 600; color: var(--vscode-descriptionForeground, #666); }
td.num { font-variant-numeric: tabular-nums; text-align: right; padding-right: 14px; }
td code { font-family: var(--vscode-editor-font-family, monospace); word-break: break-all; }
td:nth-child(2), td:nth-child(4) { white-space: nowrap; }
tr.is-stage td { background: var(--vscode-list-hoverBackground, rgba(0,0,0,.04)); }
tr.is-stage td:first-child + td { font-weight: 600; }
.badge { display: inline-block; font-size: .85em; padding: 0 6px; border-radius: 8px; border: 1px solid currentColor; }
.ok { color: var(--vscode-testing-iconPassed, #388a34); }
.no { color: var(--vscode-errorForeground, #c72e0f); }
.note, .caution { color: var(--vscode-descriptionForeground, #666); }
.caution { margin-top: 28px; font-size: .92em; }
.error { border-left: 3px solid var(--vscode-errorForeground, #c72e0f); padding: 6px 12px; background: var(--vscode-inputValidation-errorBackground, rgba(199,46,15,.08)); }
`;

function preprocessingText(s: ModelSummary): string {
  const p = s.settings.preprocessing;
  const fmt = (v: number[]) => `[${v.map((x) => +x.toPrecision(4)).join(', ')}]`;
  const ch = s.gray ? 'GRAY' : p.channels;
  return `${p.width}×${p.height} ${p.resize}, ${ch} ${p.layout}, ×${+p.scale.toPrecision(4)}, mean ${fmt(s.gray ? [p.mean[0]] : p.mean)}, std ${fmt(s.gray ? [p.std[0]] : p.std)}`;
}

/** More labels than this read as a searchable list instead of chips (a screenful; common practice, no source). */
export const CLASS_CHIPS_MAX = 60;

function settingsFileName(s: ModelSummary): string {
  return s.sidecar ? path.basename(s.sidecar) : `${path.basename(s.path, path.extname(s.path))}.factfoil.json`;
}

/** Said beside the preprocessing when it was not given: the numbers may not be the training ones. */
function preprocessingOrigin(s: ModelSummary): string {
  if (s.origin.preprocessing === 'sidecar') return '';
  return `<br><span class="guess" data-origin="preprocessing-guessed">⚠ preprocessing guessed from the input shape: check it against how the model was trained, `
    + `and set it in the panel's Preprocessing and labels drawer (it writes ${e(settingsFileName(s))} beside the model)</span>`;
}

/** Where the labels came from, or that there are none. */
function labelsOrigin(s: ModelSummary): string {
  const o = s.origin;
  const from = o.labelsFrom ?? '';
  switch (o.labels) {
    case 'file': return `from ${e(from)}`;
    case 'sidecar': return from.endsWith('.factfoil.json') ? `listed in ${e(path.basename(from))}` : `from ${e(path.basename(from))}, named in ${e(settingsFileName(s))}`;
    case 'beside': return `from ${e(path.basename(from))} beside the model`;
    case 'metadata': return `from the model's metadata ("${e(from)}")`;
    case 'generated': return `<span class="guess" data-origin="labels-generated">⚠ class 0…${s.scores.numClasses - 1}: no labels file found. `
      + `Put labels.txt (one label per line, in score order) beside the model, or choose a labels file in the panel's Preprocessing and labels drawer</span>`;
  }
}

function classList(s: ModelSummary): string {
  if (s.classes.length <= CLASS_CHIPS_MAX) {
    return `<ol class="classes" start="0">${s.classes.map((c, i) => `<li><span class="ix">${i}</span>${e(c)}</li>`).join('')}</ol>`;
  }
  return `<div class="class-find"><input type="search" id="class-filter" placeholder="Filter ${s.classes.length} classes by name or number" aria-label="Filter classes" aria-controls="class-list">`
    + `<span class="note" id="class-count" role="status">${s.classes.length} of ${s.classes.length}</span></div>`
    + `<ol class="class-list" id="class-list" start="0">${s.classes.map((c, i) => `<li data-ix="${i}"><span class="ix">${i}</span>${e(c)}</li>`).join('')}</ol>`;
}

function layerRow(l: LayerSummary): string {
  const why = l.blockedBy
    ? `<span class="no">not explainable: ${e(l.blockedBy.opType)} node <code>${e(l.blockedBy.node)}</code> on the way to the scores has no gradient rule</span>`
    : '<span class="ok">explainable</span>';
  return `<tr class="${l.stage ? 'is-stage' : ''}"><td class="num">${l.index}</td><td>${e(l.short)}${l.stage ? ' <span class="badge">stage</span>' : ''}</td>`
    + `<td><code>${e(l.id)}</code></td><td><code>[${l.shape.join(',')}]</code></td><td class="num">${l.grid[0]}×${l.grid[1]}</td><td>${why}</td></tr>`;
}

function readyBody(s: ModelSummary): string {
  const stages = s.layers.filter((l) => l.stage);
  const blocked = s.layers.filter((l) => !l.explainable).length;
  const scoresFrom = s.scores.source === 'output' ? 'the model output' : 'the input of its trailing Softmax';
  return `
<header><h1>${e(s.name)}</h1><p class="sub">${e(s.path)}</p></header>
<div class="actions">
  <button type="button" id="pick">Explain an image with this model…</button>
  <div class="drop" id="drop" aria-label="Drop an image here">or hold Shift and drop an image from the Explorer here</div>
</div>
<h2>Input</h2>
<dl class="grid">
  <dt>tensor</dt><dd>${e(s.input.name)} [${s.input.declared.map((d) => e(String(d))).join(', ')}]${s.input.declared.join() !== s.input.dims.join() ? ` → run as [${s.input.dims.join(', ')}]` : ''}</dd>
  <dt>preprocessing</dt><dd>${e(preprocessingText(s))}${preprocessingOrigin(s)}</dd>
  <dt>settings file</dt><dd>${s.sidecar ? e(s.sidecar) : 'none (defaults from the input shape; the panel writes one when you change them)'}</dd>
  <dt>sha256</dt><dd>${e(s.sha256)}</dd>
</dl>
<h2>Scores</h2>
<dl class="grid">
  <dt>tensor</dt><dd>${e(s.scores.tensor)}</dd>
  <dt>taken from</dt><dd>${e(scoresFrom)}</dd>
  <dt>classes</dt><dd>${s.scores.numClasses}</dd>
  <dt>labels</dt><dd>${labelsOrigin(s)}</dd>
</dl>
<h2>Classes</h2>
${classList(s)}
<h2>Stages</h2>
<p>${stages.length ? stages.map((l) => `<code>${e(l.short)}</code>`).join(' → ') : 'none found: every layer can still be explained on its own'}</p>
<p class="note">Stages are the layers every path from the input to the scores passes through; the panel steps through them.</p>
<h2>Layers <span class="note">(${s.layers.length}, ${blocked ? `${blocked} not explainable` : 'all explainable'})</span></h2>
<table><thead><tr><th class="num">#</th><th>layer</th><th>tensor</th><th>shape</th><th class="num">grid</th><th>maps</th></tr></thead>
<tbody>${s.layers.map(layerRow).join('')}</tbody></table>
<p class="caution">A map explains the model, not the world: validate before any safety-critical use, and follow the rules of your field.</p>`;
}

function stateBody(state: EditorState): string {
  switch (state.kind) {
    case 'ready': return readyBody(state.summary);
    case 'loading': return '<p class="note" role="status">Reading the model…</p>';
    case 'untrusted': return `<h1>Model not loaded</h1>
<p>This workspace is in Restricted Mode. Factfoil loads and runs models only in trusted workspaces, since a model file is run by the native runtime.</p>
<div class="actions"><button type="button" id="trust">Manage Workspace Trust…</button></div>`;
    case 'failed': return `<h1>Cannot show this model</h1><div class="error" role="alert"><p>${e(state.message)}</p>${state.hint ? `<p>${e(state.hint)}</p>` : ''}</div>`;
  }
}

const SCRIPT = `
const vscode = acquireVsCodeApi();
const pick = document.getElementById('pick');
if (pick) pick.addEventListener('click', () => vscode.postMessage({ type: 'pickImage' }));
const trust = document.getElementById('trust');
if (trust) trust.addEventListener('click', () => vscode.postMessage({ type: 'trustWorkspace' }));
const filter = document.getElementById('class-filter');
if (filter) {
  const items = Array.from(document.querySelectorAll('#class-list li'));
  const count = document.getElementById('class-count');
  filter.addEventListener('input', () => {
    const q = filter.value.trim().toLowerCase();
    let shown = 0;
    for (const li of items) {
      const hit = !q || li.textContent.slice(li.dataset.ix.length).toLowerCase().includes(q) || li.dataset.ix === q;
      li.hidden = !hit;
      if (hit) shown++;
    }
    count.textContent = shown + ' of ' + items.length;
  });
}
const drop = document.getElementById('drop');
if (drop) {
  const over = (on) => drop.classList.toggle('is-over', on);
  for (const t of ['dragenter', 'dragover']) document.addEventListener(t, (ev) => { ev.preventDefault(); over(true); });
  document.addEventListener('dragleave', () => over(false));
  document.addEventListener('drop', (ev) => {
    ev.preventDefault();
    over(false);
    const dt = ev.dataTransfer;
    const text = dt ? (dt.getData('application/vnd.code.uri-list') || dt.getData('text/uri-list') || dt.getData('text/plain')) : '';
    const first = text.split(/\\r?\\n/).map((s) => s.trim()).find((s) => s && !s.startsWith('#'));
    if (first) vscode.postMessage({ type: 'explainImage', uri: first });
  });
}`;

export function modelSummaryHtml(state: EditorState, page: { cspSource: string; nonce: string }): string {
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="${e(webviewCsp(page.cspSource, page.nonce))}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${state.kind === 'ready' ? e(state.summary.name) : 'Model'}</title>
<style nonce="${e(page.nonce)}">${STYLE}</style>
</head><body>
<main>${stateBody(state)}</main>
<script nonce="${e(page.nonce)}">${SCRIPT}</script>
</body></html>`;
}
