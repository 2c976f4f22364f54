import { strict as assert } from 'node:assert';
import { mkdirSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { closestLabels, expectedLabelFromPath, levenshtein, loadLabels, loadLabelsWithSource, resolveClass } from '../../../core/io/labels';
import { rejectsUserError, throwsUserError, useTempDir } from './support';

const PARTS = ['hex-nut', 'washer', 'bearing', 'spring', 'bolt', 'gear', 'clip', 'bracket'];

describe('core/io/labels', () => {
  const tmp = useTempDir('labels');
  let n = 0;
  const dir = () => {
    const d = path.join(tmp(), `case${n++}`);
    mkdirSync(d);
    return d;
  };

  it('reads one label per line, ignoring CRLF and trailing blank lines', async () => {
    const d = dir();
    writeFileSync(path.join(d, 'labels.txt'), PARTS.join('\r\n') + '\r\n\r\n');
    assert.deepEqual(await loadLabels({ modelPath: path.join(d, 'm.onnx'), labelsPath: path.join(d, 'labels.txt'), numClasses: 8 }), PARTS);
  });

  it('reads a JSON array or an index→label object', async () => {
    const d = dir();
    writeFileSync(path.join(d, 'a.json'), JSON.stringify(PARTS));
    writeFileSync(path.join(d, 'o.json'), JSON.stringify({ 1: 'washer', 0: 'hex-nut' }));
    assert.deepEqual(await loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'a.json') }), PARTS);
    assert.deepEqual(await loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'o.json') }), ['hex-nut', 'washer']);
  });

  it('takes the sidecar labels, as a file relative to the sidecar or inline', async () => {
    const d = dir();
    mkdirSync(path.join(d, 'meta'));
    writeFileSync(path.join(d, 'meta', 'names.txt'), 'a\nb\n');
    const modelPath = path.join(d, 'm.onnx');
    const fromFile = await loadLabelsWithSource({ modelPath, sidecar: { format: 'factfoil-model/1', labels: 'meta/names.txt' }, numClasses: 2 });
    assert.deepEqual(fromFile, { labels: ['a', 'b'], source: 'sidecar', from: path.join(d, 'meta', 'names.txt') });
    const inline = await loadLabelsWithSource({ modelPath, sidecar: { format: 'factfoil-model/1', labels: ['x', 'y'] }, numClasses: 2 });
    assert.deepEqual(inline.labels, ['x', 'y']);
    await rejectsUserError(
      () => loadLabels({ modelPath, sidecar: { format: 'factfoil-model/1', labels: 'gone.txt' } }),
      'gone.txt', /no such file/, 'm.factfoil.json',
    );
  });

  it('reads ONNX metadata as JSON, newline or comma lists under the documented keys', async () => {
    assert.deepEqual(await loadLabels({ modelPath: 'm.onnx', metadataProps: { labels: '["a","b","c"]' }, numClasses: 3 }), ['a', 'b', 'c']);
    assert.deepEqual(await loadLabels({ modelPath: 'm.onnx', metadataProps: { classes: 'a, b, c' }, numClasses: 3 }), ['a', 'b', 'c']);
    assert.deepEqual(await loadLabels({ modelPath: 'm.onnx', metadataProps: { class_names: 'a\nb\nc' }, numClasses: 3 }), ['a', 'b', 'c']);
    assert.deepEqual(await loadLabels({ modelPath: 'm.onnx', metadataProps: { author: 'x', names: '{"0":"a","1":"b"}' } }), ['a', 'b']);
  });

  it('finds a labels file beside a model without sidecar labels: <stem>.labels.txt before labels.txt, only with one label per class', async () => {
    const d = dir();
    const modelPath = path.join(d, 'sorter.onnx');
    writeFileSync(path.join(d, 'labels.txt'), 'a\nb\nc\n');
    assert.deepEqual(await loadLabelsWithSource({ modelPath, numClasses: 3 }), { labels: ['a', 'b', 'c'], source: 'beside', from: path.join(d, 'labels.txt') });
    writeFileSync(path.join(d, 'sorter.labels.txt'), 'x\ny\nz\n');
    assert.deepEqual((await loadLabelsWithSource({ modelPath, numClasses: 3 })).labels, ['x', 'y', 'z']);
    // Another model's labels in the folder (wrong count) are passed over, not an error.
    assert.deepEqual(await loadLabelsWithSource({ modelPath, numClasses: 2, metadataProps: { labels: 'p,q' } }), { labels: ['p', 'q'], source: 'metadata', from: 'labels' });
    assert.equal((await loadLabelsWithSource({ modelPath, numClasses: 4 })).source, 'generated');
    assert.equal((await loadLabelsWithSource({ modelPath, sidecar: { format: 'factfoil-model/1', labels: ['s', 't', 'u'] }, numClasses: 3 })).source, 'sidecar', 'the sidecar wins');
  });

  it('falls back to class 0 … class N−1', async () => {
    assert.deepEqual(await loadLabelsWithSource({ modelPath: 'm.onnx', numClasses: 3 }), { labels: ['class 0', 'class 1', 'class 2'], source: 'generated' });
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx' }), /no labels/, /--labels/);
  });

  it('prefers an explicit file over the sidecar over metadata', async () => {
    const d = dir();
    writeFileSync(path.join(d, 'l.txt'), 'file\n');
    const opts = { modelPath: path.join(d, 'm.onnx'), sidecar: { format: 'factfoil-model/1' as const, labels: ['sidecar'] }, metadataProps: { labels: '["meta"]' } };
    assert.deepEqual(await loadLabels({ ...opts, labelsPath: path.join(d, 'l.txt') }), ['file']);
    assert.deepEqual(await loadLabels(opts), ['sidecar']);
    assert.deepEqual(await loadLabels({ ...opts, sidecar: undefined }), ['meta']);
  });

  it('names the file on a count mismatch or a malformed file', async () => {
    const d = dir();
    writeFileSync(path.join(d, 'seven.txt'), PARTS.slice(0, 7).join('\n'));
    writeFileSync(path.join(d, 'gap.txt'), 'a\n\nb\n');
    writeFileSync(path.join(d, 'bad.json'), '["a", 2]');
    writeFileSync(path.join(d, 'broken.json'), '["a",');
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'seven.txt'), numClasses: 8 }), 'seven.txt', /7 labels/, /8 classes/);
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'gap.txt') }), 'gap.txt', /line 2 is empty/);
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'bad.json') }), 'bad.json', /entry 1/);
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'broken.json') }), 'broken.json', /not valid JSON/);
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx', labelsPath: path.join(d, 'none.txt') }), 'none.txt', /no such file/);
    await rejectsUserError(() => loadLabels({ modelPath: 'm.onnx', metadataProps: { labels: '["a"]' }, numClasses: 2 }), /metadata "labels"/);
  });

  it('finds the expected label from the parent folder (case-insensitive, _ - space alike)', () => {
    assert.equal(expectedLabelFromPath('/data/test/washer/img1.png', PARTS), 1);
    assert.equal(expectedLabelFromPath('/data/test/WASHER/img1.png', PARTS), 1);
    assert.equal(expectedLabelFromPath('/data/test/hex_nut/img1.png', PARTS), 0);
    assert.equal(expectedLabelFromPath('/data/test/Hex Nut/img1.png', PARTS), 0);
    assert.equal(expectedLabelFromPath('/data/test/misc/img1.png', PARTS), undefined);
    assert.equal(expectedLabelFromPath('/data/x/a b/i.png', ['a-b', 'a_b']), undefined, 'ambiguous loose match');
  });

  it('resolves a label or a 0-based index, and suggests close labels otherwise', () => {
    assert.equal(resolveClass('washer', PARTS), 1);
    assert.equal(resolveClass('Washer', PARTS), 1);
    assert.equal(resolveClass('7', PARTS), 7);
    assert.equal(resolveClass('3', ['0', '1', '2', '3x', '3', '5']), 4, 'a label that looks like a number wins over the index');
    throwsUserError(() => resolveClass('8', PARTS), /index 8 is out of range/, /0 … 7/);
    const line = throwsUserError(() => resolveClass('bering', PARTS, 'foil'), /unknown foil "bering"/, /"bearing"/);
    assert.ok(!line.includes('"gear", "clip"'), line);
    assert.deepEqual(closestLabels('nut', PARTS, 3)[0], 'hex-nut');
  });

  it('computes edit distance (worked example: kitten → sitting = 3)', () => {
    // Reference: the classic textbook example of Levenshtein distance.
    assert.equal(levenshtein('kitten', 'sitting'), 3);
    assert.equal(levenshtein('', 'abc'), 3);
    assert.equal(levenshtein('flaw', 'lawn'), 2);
  });
});
