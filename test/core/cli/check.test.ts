/** `factfoil check` as CI calls it: a subprocess of dist/cli.js on the demo model and its masks. */
import { strict as assert } from 'node:assert';
import { execFileSync, spawnSync } from 'node:child_process';
import { cpSync, existsSync, mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import * as path from 'node:path';
import sharp from 'sharp';
import { FIXTURES } from '../../helpers';

const ROOT = path.resolve(__dirname, '../../..');
const CLI = path.join(ROOT, 'dist/cli.js');
const MODEL = path.join(FIXTURES, 'parts/parts-sorter.onnx');
const run = (args: string[]) => spawnSync(process.execPath, [CLI, ...args], { encoding: 'utf8' });
const FAST = ['--map', 'evidence,detail'];

describe('factfoil check', () => {
  before(() => execFileSync(process.execPath, [path.join(ROOT, 'scripts/build.mjs')], { cwd: ROOT }));

  it('writes the JSON and the charts beside the image, never overwriting, and --json holds the sanity cascade keys', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'ff-check-'));
    cpSync(path.join(FIXTURES, 'parts/eval/gear'), path.join(dir, 'eval/gear'), { recursive: true });
    cpSync(path.join(FIXTURES, 'parts/eval-masks/gear'), path.join(dir, 'eval-masks/gear'), { recursive: true });
    const image = path.join(dir, 'eval/gear', readdirSync(path.join(dir, 'eval/gear')).sort()[0]);
    const args = ['check', image, '--model', MODEL, ...FAST, '--tests', 'sanity,truth,robustness', '--json'];
    const r = run(args);
    assert.equal(r.status, 0, r.stderr);
    const out = JSON.parse(r.stdout);
    // Scripts rely on these keys (issue contract): cascade from the scores downwards.
    assert.deepEqual(out.sanity.cascade.map((c: { randomized: string[] }) => c.randomized.at(-1)), ['logits', 'stage4', 'stage3', 'stage2', 'stage1']);
    assert.deepEqual(out.sanity.cascade[1].randomized, ['logits', 'stage4']);
    for (const key of ['spearman', 'spearman_abs', 'ssim', 'hog']) assert.deepEqual(Object.keys(out.sanity.cascade[0][key]), ['evidence', 'detail'], key);
    assert.ok(out.independent === undefined && out.sanity.independent.length === 5);
    // The mask came from the sibling eval-masks folder.
    assert.equal(out.truth.source, 'mask');
    assert.ok(out.truth.maps.evidence.auc_judd > 0.5 && out.robustness.steps.length === 8);
    assert.equal(out.files.length, 3, 'the JSON, the cascade chart and the drift chart');
    for (const f of out.files) assert.ok(existsSync(f) && path.dirname(f) === path.dirname(image), f);
    const png = out.files.find((f: string) => f.endsWith('.sanity.png'));
    const meta = await sharp(png).metadata();
    assert.ok(meta.format === 'png' && meta.width! > 400);
    assert.deepEqual(JSON.parse(readFileSync(out.files[0], 'utf8')).sanity, out.sanity);
    const again = JSON.parse(run(['check', image, '--model', MODEL, '--map', 'evidence', '--tests', 'truth', '--json']).stdout);
    assert.ok(again.files[0].endsWith('-2.json'), again.files[0]);
    assert.equal(again.sanity, undefined);
  });

  it('summarises a folder (mean ± sd per figure and kind) with masks by the <folder>-masks convention', () => {
    const out = mkdtempSync(path.join(tmpdir(), 'ff-check-'));
    const r = run(['check', path.join(FIXTURES, 'parts/demo/hex-nut'), '--model', MODEL, ...FAST, '--tests', 'truth', '--out', out, '--json']);
    assert.equal(r.status, 0, r.stderr);
    const j = JSON.parse(r.stdout);
    assert.equal(j.images.length, 3);
    const s = j.summary;
    assert.equal(s.truth.nss.evidence.n, 3);
    const nss = j.images.map((i: { truth: { maps: { evidence: { nss: number } } } }) => i.truth.maps.evidence.nss);
    const mean = nss.reduce((a: number, b: number) => a + b, 0) / 3;
    assert.ok(Math.abs(s.truth.nss.evidence.mean - mean) < 1e-12);
    const sd = Math.sqrt(nss.reduce((a: number, b: number) => a + (b - mean) ** 2, 0) / 2);
    assert.ok(Math.abs(s.truth.nss.evidence.sd - sd) < 1e-12);
    assert.ok(s.truth.nss.detail.n === 3 && existsSync(j.summary_file));
  });

  it('exits 2 with one line for user mistakes', () => {
    const image = path.join(FIXTURES, 'parts/demo/bolt/bolt-0004.png');
    const cases: [string[], RegExp][] = [
      [['check', image, '--model', MODEL, '--tests', 'vibes'], /unknown check 'vibes'/],
      [['check', image, '--model', MODEL, '--map', 'mismatch'], /unknown map kind 'mismatch'/],
      [['check', image, '--model', MODEL, '--box', '1,2,3'], /--box must be x,y,w,h/],
      [['check', image, '--model', MODEL, '--mask', image, '--box', '1,2,3,4'], /--mask or --box, not both/],
      [['check', path.join(FIXTURES, 'parts/labels.txt'), '--model', MODEL, '--tests', 'truth'], /./],
    ];
    for (const [args, why] of cases) {
      const r = run(args);
      assert.equal(r.status, 2, `${args.join(' ')}: ${r.stderr}`);
      assert.match(r.stderr, why);
      assert.equal(r.stderr.trim().split('\n').length, 1, r.stderr);
    }
  });
});
