// Run by a node of another platform (arm64 node under qemu, node.exe under wine): starts the
// engine process of an unpacked .vsix the way the extension does (child_process.fork of
// dist/engine-process.js, typed messages over the IPC channel), so the engine loads that
// package's own onnxruntime and sharp binaries; asks it for the prediction of one image and
// the contrast map (fact = top-1, foil = top-2, margin variant) at the model's last stage,
// and writes both to a JSON file (a file, not stdout: node.exe under wine cannot write to a
// Unix pipe).
//   node package-foreign-engine.cjs <unpacked>/extension <model.onnx> <image> <out.json> [--via <exe> [<arg>]]
// --via starts the engine through another program (qemu-aarch64-static <arm64 node>), for a
// foreign node that cannot start a child of its own platform without binfmt.
'use strict';
const { fork } = require('node:child_process');
const { join } = require('node:path');
const { writeFileSync } = require('node:fs');

const [extension, model, image, out, ...rest] = process.argv.slice(2);
if (!out) {
  process.stderr.write('usage: package-foreign-engine.cjs <extension dir> <model.onnx> <image> <out.json> [--via <exe> [<arg>]]\n');
  process.exit(2);
}
const via = rest[0] === '--via' ? rest.slice(1) : [];
const V = 1; // ENGINE_PROTOCOL_VERSION of core/engine-process/protocol.ts
const started = Date.now();
const child = fork(join(extension, 'dist', 'engine-process.js'), ['--threads=2'], {
  stdio: ['ignore', 'pipe', 'pipe', 'ipc'],
  ...(via.length ? { execPath: via[0], execArgv: via.slice(1) } : {}),
});
let log = '';
child.stdout.on('data', (d) => { log += d; });
child.stderr.on('data', (d) => { log += d; });
const timer = setTimeout(() => finish(new Error('no answer from the engine within 600 s')), 600_000);

let finished = false;
function finish(error, result) {
  if (finished) return;
  finished = true;
  clearTimeout(timer);
  const body = error ? { ok: false, error: String(error.message ?? error), engineLog: log } : { ok: true, ...result };
  writeFileSync(out, JSON.stringify(body) + '\n');
  if (child.connected) child.disconnect();
  setTimeout(() => process.exit(error ? 1 : 0), 200);
}

const pending = new Map();
let nextId = 1;
function request(req) {
  const id = nextId++;
  child.send({ v: V, type: 'request', id, request: req });
  return new Promise((resolve, reject) => pending.set(id, { resolve, reject }));
}
const floats = (b64) => Array.from(new Float32Array(Uint8Array.from(Buffer.from(b64, 'base64')).buffer));

child.on('exit', (code, signal) => finish(new Error(`the engine exited (code ${code}, signal ${signal}) before answering`)));
child.on('error', (e) => finish(e));
child.on('message', async (m) => {
  if (m.type === 'log') { log += `[${m.level}] ${m.message}\n`; return; }
  if (m.type === 'result' || m.type === 'error') {
    const p = pending.get(m.id);
    pending.delete(m.id);
    if (m.type === 'result') p.resolve(m.result); else p.reject(new Error(`${m.kind}: ${m.message}${m.hint ? ` (${m.hint})` : ''}`));
    return;
  }
  if (m.type !== 'ready') return;
  try {
    const readyMs = Date.now() - started;
    const view = await request({ op: 'openView', model, image });
    const stages = view.summary.layers.filter((l) => l.stage && l.explainable);
    const layer = stages[stages.length - 1];
    const [fact, foil] = view.prediction;
    const t0 = Date.now();
    const { maps } = await request({
      op: 'maps', viewId: view.viewId, kind: 'contrast', variant: 'margin', fact: fact.index, foil: foil.index,
      layers: [layer.id], estimate: 'exact', probeSeeds: 32, budgetMiB: 256,
    });
    const map = maps[0];
    finish(null, {
      platform: process.platform, arch: process.arch, node: process.version, readyMs, mapMs: Date.now() - t0,
      top3: view.prediction.slice(0, 3), layer: layer.id,
      map: { width: map.width, height: map.height, values: floats(map.values), rawWidth: map.rawWidth, rawHeight: map.rawHeight, raw: floats(map.raw) },
    });
  } catch (e) {
    finish(e);
  }
});
