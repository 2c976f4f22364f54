/**
 * Bad models (issue 7, item 1): every case ends in one specific one-line UserError naming the
 * file and what is wrong, through the core pipeline and through the CLI (exit 2, one line on
 * stderr, no stack), and the engine stays usable afterwards.
 */
import { strict as assert } from 'node:assert';
import { execFileSync, spawn } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { exerciseModel } from '../../fuzz/pipeline';
import { rejectsUserError, useTempDir } from '../io/support';
import { badModelCases, DEMO_MODEL, demoProto } from './model-cases';
import { encodeModelProto } from '../../../core/model/proto';

const ROOT = path.resolve(__dirname, '../../..');
const CLI = path.join(ROOT, 'dist/cli.js');

/** Runs the CLI and collects exit status and streams. */
function runCli(args: string[]): Promise<{ status: number | null; stdout: string; stderr: string }> {
  return new Promise((resolve) => {
    const p = spawn(process.execPath, [CLI, ...args]);
    let stdout = '', stderr = '';
    p.stdout.on('data', (d) => (stdout += d));
    p.stderr.on('data', (d) => (stderr += d));
    p.on('close', (status) => resolve({ status, stdout, stderr }));
  });
}

/** Runs `fn` over `items`, `width` at a time. */
async function inParallel<T, R>(items: T[], width: number, fn: (t: T) => Promise<R>): Promise<R[]> {
  const out: R[] = new Array(items.length);
  let next = 0;
  await Promise.all(Array.from({ length: width }, async () => {
    while (next < items.length) { const i = next++; out[i] = await fn(items[i]); }
  }));
  return out;
}

describe('bad models', () => {
  const tmp = useTempDir('bad-models');
  const engine = new Engine();
  after(() => engine.dispose());
  const cases = badModelCases();
  const files = new Map<string, string>();
  const caseFile = (name: string) => {
    if (!files.has(name)) files.set(name, cases.find((c) => c.name === name)!.make(mkdtempSync(path.join(tmp(), 'case-'))));
    return files.get(name)!;
  };

  for (const c of cases) {
    it(`${c.name}: a one-line UserError naming the file and the cause`, async () => {
      const file = caseFile(c.name);
      await rejectsUserError(() => exerciseModel(engine, file, { maps: true }), path.basename(file), ...c.expect);
    });
  }

  it('tolerates what is odd but harmless: an output listed twice, a named dynamic batch axis, scores shaped [1,R,1,1]', async () => {
    const m = demoProto();
    m.graph!.output!.push({ ...m.graph!.output![0] });
    m.graph!.input![0].type!.tensor_type!.shape!.dim![0] = { dim_param: 'batch' };
    const file = path.join(mkdtempSync(path.join(tmp(), 'ok-')), 'odd.onnx');
    writeFileSync(file, encodeModelProto(m));
    assert.equal((await exerciseModel(engine, file, { maps: true })).maps, 1);
    // A convolutional head's [1,R,1,1] output, as some exporters leave it.
    const c = demoProto();
    c.graph!.node!.push({ op_type: 'Reshape', name: 'to_4d', input: ['logits', 'shape_4d'], output: ['logits_4d'] });
    c.graph!.initializer!.push({ name: 'shape_4d', dims: [4], data_type: 7, raw_data: new Uint8Array(BigInt64Array.from([1n, 8n, 1n, 1n]).buffer) });
    c.graph!.output = [{ name: 'logits_4d' }];
    const file4d = path.join(mkdtempSync(path.join(tmp(), 'ok-')), 'head4d.onnx');
    writeFileSync(file4d, encodeModelProto(c));
    const r = await exerciseModel(engine, file4d, { maps: true, request: 2 });
    assert.equal(r.maps, 1);
  });

  it('leaves the engine usable: the demo model still gives a map after all the bad ones', async () => {
    const r = await exerciseModel(engine, DEMO_MODEL, { maps: true });
    assert.ok(r.layers > 4 && r.maps === 1, JSON.stringify(r));
  });

  describe('through the CLI', () => {
    before(() => execFileSync(process.execPath, [path.join(ROOT, 'scripts/build.mjs')], { cwd: ROOT }));

    it('every bad model: `layers` and `explain` exit 2 with one line on stderr, no stack trace', async () => {
      const image = path.join(ROOT, 'test-fixtures/parts/demo/bearing/bearing-0002.png');
      // `layers` for every case; `explain` too where the failure comes after loading (the head, the layers).
      const late = /quantized|spatial|scores|unknown op|custom|dims/;
      const runs = cases.flatMap((c) => [
        { c, args: ['layers', caseFile(c.name)] },
        ...(late.test(c.name) ? [{ c, args: ['explain', image, '--model', caseFile(c.name), '--out', tmp(), '--json'] }] : []),
      ]);
      const results = await inParallel(runs, 4, (r) => runCli(r.args));
      runs.forEach((r, i) => {
        const { status, stdout, stderr } = results[i];
        const what = `${r.c.name} (${r.args[0]}): ${stderr}`;
        assert.equal(status, 2, what);
        assert.equal(stdout, '', what);
        const lines = stderr.trimEnd().split('\n');
        assert.equal(lines.length, 1, what);
        assert.match(lines[0], /^factfoil: /, what);
        assert.ok(lines[0].includes(path.basename(caseFile(r.c.name))), what);
        for (const p of r.c.expect) assert.match(lines[0], p, what);
        assert.doesNotMatch(stderr, /\n\s+at |internal error/, what);
      });
    });
  });
});
