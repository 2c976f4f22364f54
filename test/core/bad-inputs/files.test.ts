/**
 * Files (issue 7, item 4): saving with hostile labels and layer names never overwrites, never
 * writes outside the image's folder or the chosen output folder, leaves no temporary files, and
 * gives names safe on every common file system; the model sidecar is replaced atomically, and a
 * malformed one is reported, never replaced.
 */
import { strict as assert } from 'node:assert';
import { execFileSync, spawnSync } from 'node:child_process';
import { copyFileSync, mkdirSync, readdirSync, readFileSync, statSync, symlinkSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { mapFileStem, writeUniqueFiles } from '../../../core/io/naming';
import { readSidecar, sidecarPath, writeSidecar, Sidecar } from '../../../core/io/sidecar';
import { rejectsUserError, useTempDir } from '../io/support';
import { DEMO_MODEL } from './model-cases';

const ROOT = path.resolve(__dirname, '../../..');
const DEMO_IMAGE = path.join(ROOT, 'test-fixtures/parts/demo/bearing/bearing-0002.png');

/** Labels a model or a colleague's labels file may carry: separators, traversal, control characters, reserved and long names. */
const HOSTILE_LABELS = [
  '../../escaped', 'a/b\\c', '..', 'bell\u0007tab\tnul\u0000', 'CON', 'x'.repeat(400), 'right\u202Eto-left', ' -rf *',
];

/** Every file under `dir`, relative, recursively. */
function tree(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) => (e.isDirectory() ? tree(path.join(dir, e.name)).map((f) => path.join(e.name, f)) : [e.name]));
}

/** A name part safe on Linux, macOS and Windows: no separators or control characters, no reserved device name, ≤ 255 bytes. */
function assertSafeName(name: string): void {
  assert.ok(Buffer.byteLength(name) <= 255, `${name.length} chars`);
  assert.doesNotMatch(name, /[\/\\\u0000-\u001f\u007f:*?"<>|\u202e]/, name);
  assert.doesNotMatch(name, /^\.|\.\.|[. ]$/, name);
  assert.doesNotMatch(name.split('.')[0], /^(con|prn|aux|nul|com\d|lpt\d)$/i, name);
}

describe('saving files safely', () => {
  const tmp = useTempDir('bad-files');

  it('sanitizes every part of a map file name built from hostile labels and tensor names', () => {
    for (const label of HOSTILE_LABELS) {
      const stem = mapFileStem({ imagePath: `/photos/${label}.png`, map: `evidence/${label}`, layerShort: label, fact: label, foil: label });
      assertSafeName(`${stem}.json`);
      assert.equal(path.basename(stem), stem, `stays a plain name: ${stem}`);
    }
  });

  it('refuses a stem that would lead out of the folder', async () => {
    const dir = path.join(tmp(), 'guard');
    mkdirSync(dir);
    for (const stem of ['../outside', 'sub/inside', '/abs/path']) {
      await rejectsUserError(() => writeUniqueFiles(dir, stem, ['.png'], () => ['x']), /leads out of/);
    }
    assert.deepEqual(readdirSync(tmp()).sort(), ['guard']);
  });

  it('does not follow a planted symlink: the name is taken, the target untouched', async () => {
    const dir = path.join(tmp(), 'links');
    mkdirSync(dir);
    const victim = path.join(tmp(), 'victim.txt');
    writeFileSync(victim, 'precious');
    symlinkSync(victim, path.join(dir, 'map.png'));
    symlinkSync(path.join(tmp(), 'nowhere.txt'), path.join(dir, 'map.json')); // dangling
    const chosen = await writeUniqueFiles(dir, 'map', ['.png', '.json'], () => ['png bytes', '{}']);
    assert.equal(chosen.stem, 'map-2');
    assert.equal(readFileSync(victim, 'utf8'), 'precious');
    assert.deepEqual(readdirSync(tmp()).filter((f) => f.startsWith('nowhere')), [], 'the dangling link was not followed');
  });

  describe('factfoil explain with a hostile labels file', () => {
    before(() => execFileSync(process.execPath, [path.join(ROOT, 'scripts/build.mjs')], { cwd: ROOT }));

    it('writes only inside the image folder (or --out), never overwrites, leaves no temp files', () => {
      const root = path.join(tmp(), 'explain');
      const images = path.join(root, 'images');
      const out = path.join(root, 'out');
      mkdirSync(images, { recursive: true });
      mkdirSync(out);
      const image = path.join(images, 'CON.png');
      copyFileSync(DEMO_IMAGE, image);
      const labels = path.join(root, 'labels.txt');
      writeFileSync(labels, HOSTILE_LABELS.map((l) => l.replace(/[\t\u0000]/g, ' ')).join('\n') + '\n');
      const explain = (extra: string[]) => spawnSync(process.execPath, [path.join(ROOT, 'dist/cli.js'), 'explain', image, '--model', DEMO_MODEL,
        '--labels', labels, '--fact', '0', '--foil', '1', '--map', 'evidence,contrast', '--layer', 'stage4', '--raw', '--json', ...extra], { encoding: 'utf8' });
      const runs = [explain([]), explain([]), explain(['--out', out])];
      for (const r of runs) assert.equal(r.status, 0, r.stderr);
      const written = runs.flatMap((r) => (JSON.parse(r.stdout).outputs as { png: string; record: string; raw: string }[]).flatMap((o) => [o.png, o.record, o.raw]));
      assert.equal(new Set(written).size, written.length, 'no file written twice');
      for (const f of written.slice(0, 12)) assert.equal(path.dirname(f), images, f);
      for (const f of written.slice(12)) assert.equal(path.dirname(f), out, f);
      for (const f of written) { assertSafeName(path.basename(f)); assert.ok(statSync(f).size > 0); }
      // Nothing else appeared anywhere under the temp root: no escapes, no temporary files.
      const expected = ['labels.txt', path.join('images', 'CON.png'), ...written.map((f) => path.relative(root, f))].sort();
      assert.deepEqual(tree(root).sort(), expected);
      // The second run did not replace the first run's files.
      const first = JSON.parse(runs[0].stdout).outputs[0];
      assert.equal(JSON.parse(readFileSync(first.record, 'utf8')).files.png, path.basename(first.png));
    });
  });

  describe('the model sidecar', () => {
    const model = (name: string) => { const d = path.join(tmp(), name); mkdirSync(d); return path.join(d, 'm.onnx'); };

    it('is never seen half-written while settings are saved over and over', async () => {
      const m = model('atomic');
      const versions: Sidecar[] = Array.from({ length: 40 }, (_, i) => ({ format: 'factfoil-model/1', labels: Array.from({ length: 200 + i * 37 }, (_, k) => `class-${i}-${k}`) }));
      await writeSidecar(m, versions[0]);
      let reads = 0, writing = true;
      const reader = (async () => {
        while (writing) { await readSidecar(m); reads++; } // throws on a partial file
      })();
      for (const v of versions) await writeSidecar(m, v);
      writing = false;
      await reader;
      assert.ok(reads > 0);
      assert.deepEqual(await readSidecar(m), versions[versions.length - 1]);
      assert.deepEqual(readdirSync(path.dirname(m)), ['m.factfoil.json'], 'no temporary files left');
    });

    it('a malformed sidecar is reported on save, and kept as it was', async () => {
      const m = model('malformed');
      for (const text of ['{ "format": "factfoil-model/1", "labels": [', '{"format": "factfoil-model/1", "lables": "x.txt"}', '']) {
        writeFileSync(sidecarPath(m), text);
        await rejectsUserError(() => writeSidecar(m, { format: 'factfoil-model/1', labels: ['a', 'b'] }), 'm.factfoil.json', /fix or delete the model settings file|not valid JSON/);
        assert.equal(readFileSync(sidecarPath(m), 'utf8'), text);
      }
    });
  });
});
