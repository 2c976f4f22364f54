// Runs every committed fixture model with onnxruntime-node (the runtime the engine uses) and
// compares its float32 output with the generator's reference: ops/<case>/y.npy (our float64
// implementation written from the ONNX spec) and arch/<family>/refs.json logits (PyTorch).
// An independent check that the float64 implementations follow the spec as a real runtime reads it.
// Usage: node test-fixtures/gen/check_with_ort.mjs [ops|arch]
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import ort from 'onnxruntime-node';

const root = path.dirname(path.dirname(fileURLToPath(import.meta.url)));

/** Minimal .npy (format 1.0/2.0) reader for little-endian f4/f8/i8. */
function readNpy(file) {
  const buf = fs.readFileSync(file);
  const major = buf[6];
  const hlen = major === 1 ? buf.readUInt16LE(8) : buf.readUInt32LE(8);
  const hstart = major === 1 ? 10 : 12;
  const header = buf.subarray(hstart, hstart + hlen).toString('latin1');
  const descr = /'descr':\s*'([^']+)'/.exec(header)[1];
  const shapeText = /'shape':\s*\(([^)]*)\)/.exec(header)[1];
  const shape = shapeText.split(',').map((s) => s.trim()).filter(Boolean).map(Number);
  if (/True/.test(/'fortran_order':\s*(\w+)/.exec(header)[1])) throw new Error(`${file}: fortran order`);
  const body = buf.subarray(hstart + hlen);
  const ab = body.buffer.slice(body.byteOffset, body.byteOffset + body.byteLength);
  const data = descr === '<f4' ? new Float32Array(ab) : descr === '<f8' ? new Float64Array(ab) : null;
  if (!data) throw new Error(`${file}: dtype ${descr}`);
  return { shape, data };
}

function relMaxErr(got, want) {
  let num = 0;
  let den = 0;
  for (let i = 0; i < want.length; i++) {
    num = Math.max(num, Math.abs(got[i] - want[i]));
    den = Math.max(den, Math.abs(want[i]));
  }
  return num / Math.max(den, 1e-30);
}

async function runModel(modelPath, inputName, x) {
  const session = await ort.InferenceSession.create(modelPath);
  const feeds = { [inputName]: new ort.Tensor('float32', Float32Array.from(x.data), x.shape) };
  return session.run(feeds);
}

let failures = 0;
const which = process.argv[2];
const checkDir = process.env.FACTFOIL_FIXTURE_CHECK_DIR ?? '/tmp/factfoil-fixture-check';

if (!which || which === 'ops') {
  const dir = path.join(root, 'ops');
  let worst = 0;
  let n = 0;
  for (const name of fs.readdirSync(dir).sort()) {
    const d = path.join(dir, name);
    const out = await runModel(path.join(d, 'model.onnx'), 'x', readNpy(path.join(d, 'x.npy')));
    const want = readNpy(path.join(d, 'y.npy'));
    const got = out.y;
    const err = relMaxErr(got.data, want.data);
    const shapeOk = JSON.stringify(Array.from(got.dims)) === JSON.stringify(want.shape);
    worst = Math.max(worst, err);
    n++;
    // float32 runtime vs float64 reference: 1e-5 relative to the output's max magnitude
    // (float32 epsilon 1.2e-7 times a few accumulations; common practice, no source).
    if (err > 1e-5 || !shapeOk) {
      failures++;
      console.log(`FAIL ops/${name}: rel max err ${err.toExponential(2)} shape ${got.dims} vs ${want.shape}`);
    }
  }
  console.log(`ops: ${n} cases run with onnxruntime-node, worst rel max err ${worst.toExponential(2)}`);
}

if (!which || which === 'arch') {
  const dir = path.join(root, 'arch');
  if (fs.existsSync(dir)) {
    for (const name of fs.readdirSync(dir).sort()) {
      const d = path.join(dir, name);
      const refs = JSON.parse(fs.readFileSync(path.join(d, 'refs.json'), 'utf8'));
      const out = await runModel(path.join(d, 'model.onnx'), refs.input_name, readNpy(path.join(d, refs.input)));
      const names = Object.keys(out);
      const logits = out[refs.output ?? names[0]];
      const want = refs.output_values ?? refs.logits;
      const err = relMaxErr(logits.data, want);
      let tapNote = '(no export-time check data)';
      const full = path.join(checkDir, name, 'full.onnx');
      if (fs.existsSync(full)) {
        // The export with every named tensor still a graph output: each must equal torch's hooked value.
        const outNames = JSON.parse(fs.readFileSync(path.join(checkDir, name, 'outputs.json'), 'utf8'));
        const all = await runModel(full, refs.input_name, readNpy(path.join(d, refs.input)));
        let tapWorst = 0;
        for (const n of outNames) {
          const e = relMaxErr(all[n].data, readNpy(path.join(checkDir, name, `${n}.npy`)).data);
          tapWorst = Math.max(tapWorst, e);
          const layer = refs.layers.find((l) => l.tensor === n);
          if (layer && JSON.stringify(Array.from(all[n].dims)) !== JSON.stringify([1, ...layer.shape])) {
            failures++;
            console.log(`FAIL arch/${name}: tensor ${n} has run-time shape ${all[n].dims}, refs say ${layer.shape}`);
          }
          if (e > 1e-4) {
            failures++;
            console.log(`FAIL arch/${name}: tensor ${n} differs from torch, rel max err ${e.toExponential(2)}`);
          }
        }
        tapNote = `${outNames.length} named tensors match torch, worst ${tapWorst.toExponential(2)}`;
      }
      if (err > 1e-4 || names.length !== 1) {
        failures++;
        console.log(`FAIL arch/${name}: rel max err ${err.toExponential(2)} outputs ${names}`);
      } else {
        console.log(`arch/${name}: output ${names[0]} matches torch, rel max err ${err.toExponential(2)}; ${tapNote}`);
      }
    }
  }
}

if (failures) {
  console.log(`${failures} failure(s)`);
  process.exit(1);
}
