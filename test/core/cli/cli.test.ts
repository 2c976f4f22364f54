/** The `factfoil` command as CI calls it: a subprocess of dist/cli.js. */
import { strict as assert } from 'node:assert';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, cpSync, existsSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import { readNpy } from '../../../core/io/npy';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

const ROOT = path.resolve(__dirname, '../../..');
const CLI = path.join(ROOT, 'dist/cli.js');
const run = (args: string[]) => spawnSync(process.execPath, [CLI, ...args], { encoding: 'utf8' });

describe('factfoil CLI', () => {
  before(() => execFileSync(process.execPath, [path.join(ROOT, 'scripts/build.mjs')], { cwd: ROOT }));

  it('layers --json lists the four residual stages of the resnet fixture as stages', () => {
    const r = run(['layers', path.join(FIXTURES, 'arch/resnet/model.onnx'), '--json']);
    assert.equal(r.status, 0, r.stderr);
    const stages = JSON.parse(r.stdout).layers.filter((l: { stage: boolean }) => l.stage).map((l: { id: string }) => l.id);
    for (const s of ['stage1', 'stage2', 'stage3', 'stage4']) assert.ok(stages.includes(s), stages.join(','));
  });

  it('says on stderr what it guessed: preprocessing from the input shape, labels it could not find; nothing when both are given', () => {
    const image = path.join(FIXTURES, 'parts/demo/washer/washer-0001.png');
    const bare = run(['predict', image, '--model', path.join(FIXTURES, 'arch/resnet/model.onnx'), '--json']);
    assert.equal(bare.status, 0, bare.stderr);
    assert.match(bare.stderr, /note: model\.onnx has no preprocessing settings; guessed from its input shape: .* write "preprocess" into model\.factfoil\.json/);
    assert.match(bare.stderr, /note: no labels found for model\.onnx; classes are named class 0…class \d+\. Put labels\.txt beside the model, or pass --labels <file>\./);
    JSON.parse(bare.stdout); // the notes stay off stdout
    const demo = run(['predict', image, '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--json']);
    assert.equal(demo.status, 0, demo.stderr);
    assert.doesNotMatch(demo.stderr, /note:/);
  });

  it('grad matches the PyTorch float64 reference (test-fixtures/arch/resnet, rel L2 ≤ 1e-4), making the missing folder of --out', async () => {
    const out = path.join(mkdtempSync(path.join(tmpdir(), 'ff-')), 'not', 'yet', 'g.npy');
    const r = run(['grad', '--model', path.join(FIXTURES, 'arch/resnet/model.onnx'), '--input', path.join(FIXTURES, 'arch/resnet/input.npy'), '--layer', 'stage2', '--target', '5', '--out', out]);
    assert.equal(r.status, 0, r.stderr);
    const g = await readNpy(out);
    const ref = await readNpy(path.join(FIXTURES, 'arch/resnet/grad_stage2_logit_5.npy'));
    assert.deepEqual(g.shape, ref.shape);
    assert.ok(relL2(toNumbers(g.data), toNumbers(ref.data)) < 1e-4);
  });

  it('explain saves PNG + record beside the image and never overwrites', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-'));
    cpSync(path.join(FIXTURES, 'parts/demo/bearing'), path.join(dir, 'bearing'), { recursive: true });
    const args = ['explain', path.join(dir, 'bearing'), '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--layer', 'last', '--json'];
    const first = JSON.parse(run(args).stdout), second = JSON.parse(run(args).stdout);
    assert.ok(existsSync(first.outputs[0].png) && existsSync(first.outputs[0].record));
    assert.notEqual(first.outputs[0].png, second.outputs[0].png);
    assert.match(second.outputs[0].png, /-2\.png$/);
  });

  it('explain --out makes a missing output folder before any work, and refuses a file there in one line', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-'));
    const image = path.join(FIXTURES, 'parts/demo/bearing/bearing-0002.png');
    const out = path.join(dir, 'maps', 'run-1');
    const r = run(['explain', image, '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--layer', 'last', '--out', out, '--json']);
    assert.equal(r.status, 0, r.stderr);
    assert.equal(path.dirname(JSON.parse(r.stdout).outputs[0].png), out);
    const file = path.join(dir, 'taken');
    writeFileSync(file, 'keep me');
    const bad = run(['explain', image, '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--layer', 'last', '--out', file]);
    assert.equal(bad.status, 2);
    assert.match(bad.stderr, /cannot write into .*taken: it is a file, not a folder/);
    assert.equal(bad.stderr.trim().split('\n').length, 1, bad.stderr);
    assert.equal(readFileSync(file, 'utf8'), 'keep me');
  });

  it('predict gives PyTorch\'s probabilities for every demo image (manifest.json: PyTorch float32 softmax, within 1e-4)', () => {
    const manifest = JSON.parse(readFileSync(path.join(FIXTURES, 'parts/demo/manifest.json'), 'utf8'));
    for (const m of manifest.images as { image: string; top3: { label: string; p: number }[] }[]) {
      const r = run(['predict', path.join(FIXTURES, 'parts/demo', m.image), '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--top', '3', '--json']);
      assert.equal(r.status, 0, r.stderr);
      const got = JSON.parse(r.stdout).prediction as { label: string; p: number }[];
      got.forEach((g, i) => {
        assert.equal(g.label, m.top3[i].label, m.image);
        assert.ok(Math.abs(g.p - m.top3[i].p) < 1e-4, `${m.image}: ${g.p} vs ${m.top3[i].p}`);
      });
    }
  });

  it('explain over a folder: one prediction per image, and a misclassified image is contrasted with its expected label', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-'));
    cpSync(path.join(FIXTURES, 'parts/demo/hex-nut'), path.join(dir, 'hex-nut'), { recursive: true });
    const r = run(['explain', dir, '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--layer', 'last', '--json']);
    assert.equal(r.status, 0, r.stderr);
    const out = JSON.parse(r.stdout);
    assert.equal(out.images.length, 3);
    const wrong = out.images.find((i: { image: string }) => i.image.endsWith('hex-nut-0088.png'));
    assert.equal(wrong.expected, 'hex-nut');
    assert.equal(wrong.prediction[0].label, 'washer');
    const map = out.outputs.find((o: { image: string }) => o.image === wrong.image);
    assert.deepEqual([map.map, map.fact, map.foil], ['contrast', 'washer', 'hex-nut']);
    assert.match(path.basename(map.png), /^hex-nut-0088\.contrast\..+\.washer-vs-hex-nut\.png$/);
  });

  it('explain over a folder skips an unreadable image, explains the rest and exits 2', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-'));
    cpSync(path.join(FIXTURES, 'parts/demo/bolt'), path.join(dir, 'bolt'), { recursive: true });
    writeFileSync(path.join(dir, 'bolt', 'broken.png'), Buffer.from('not an image at all'));
    const r = run(['explain', dir, '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--layer', 'last', '--json']);
    assert.equal(r.status, 2, r.stderr);
    const out = JSON.parse(r.stdout);
    assert.equal(out.images.length, 2);
    assert.equal(out.skipped.length, 1);
    assert.match(out.skipped[0].error, /broken\.png/);
    assert.match(r.stderr, /1 of 3 images could not be read/);
  });

  it('a probe estimate records K, seed and design, and the design can be chosen', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-'));
    cpSync(path.join(FIXTURES, 'parts/demo/gear'), path.join(dir, 'gear'), { recursive: true });
    const base = ['explain', path.join(dir, 'gear'), '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx'), '--map', 'mismatch', '--layer', 'stage2', '--json'];
    for (const [arg, design] of [['probe:4', 'rescaled'], ['probe:4:rademacher', 'rademacher']]) {
      const r = run([...base, '--estimate', arg]);
      assert.equal(r.status, 0, r.stderr);
      const record = JSON.parse(readFileSync(JSON.parse(r.stdout).outputs[0].record, 'utf8'));
      assert.deepEqual(record.estimate, { mode: 'probe', k: 4, seed: 1, design });
    }
    assert.equal(run([...base, '--estimate', 'probe:4:sideways']).status, 2);
  });

  it('user errors exit 2 with one line and no stack trace', () => {
    for (const args of [['explain', 'no-such.png', '--model', path.join(FIXTURES, 'parts/parts-sorter.onnx')], ['layers', 'nothing.onnx'], ['grad', '--model', path.join(FIXTURES, 'arch/resnet/model.onnx'), '--input', path.join(FIXTURES, 'arch/resnet/input.npy'), '--layer', 'nope', '--target', '1', '--out', '/tmp/x.npy'], ['frobnicate']]) {
      const r = run(args);
      assert.equal(r.status, 2, `${args.join(' ')}: ${r.stderr}`);
      assert.equal(r.stderr.trim().split('\n').length, 1, r.stderr);
      assert.doesNotMatch(r.stderr, /\n\s+at /);
    }
  });
});
