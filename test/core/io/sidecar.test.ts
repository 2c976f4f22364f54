import { strict as assert } from 'node:assert';
import { mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { readSidecar, resolvePreprocessSpec, sidecarPath, writeSidecar } from '../../../core/io/sidecar';
import { PREPROCESS_PRESETS } from '../../../core/image/preprocess';
import { rejectsUserError, throwsUserError, useTempDir } from './support';

describe('core/io/sidecar', () => {
  const tmp = useTempDir('sidecar');
  let n = 0;
  const model = (content?: string) => {
    const dir = path.join(tmp(), `case${n++}`);
    mkdirSync(dir);
    const m = path.join(dir, 'parts.v2.onnx');
    if (content !== undefined) writeFileSync(sidecarPath(m), content);
    return m;
  };

  it('lives next to the model as <model-stem>.factfoil.json', () => {
    assert.equal(sidecarPath('/models/parts.v2.onnx'), path.join('/models', 'parts.v2.factfoil.json'));
  });

  it('is undefined when absent', async () => {
    assert.equal(await readSidecar(model()), undefined);
  });

  it('round-trips through write and read, replacing the old file', async () => {
    const m = model();
    const first = { format: 'factfoil-model/1' as const, labels: 'labels.txt' };
    await writeSidecar(m, first);
    assert.deepEqual(await readSidecar(m), first);
    const second = {
      format: 'factfoil-model/1' as const,
      labels: ['hex-nut', 'washer'],
      preprocess: { preset: 'standardized' as const, resize: 'crop' as const, size: [64, 64] as [number, number] },
    };
    await writeSidecar(m, second);
    assert.deepEqual(await readSidecar(m), second);
    assert.deepEqual(readdirSync(path.dirname(m)), ['parts.v2.factfoil.json'], 'no temp files');
    assert.ok(readFileSync(sidecarPath(m), 'utf8').endsWith('\n'));
  });

  it('names the file and the field when the content is wrong', async () => {
    await rejectsUserError(async () => readSidecar(model('{ "format": "factfoil-model/1", ')), 'parts.v2.factfoil.json', /not valid JSON/);
    await rejectsUserError(async () => readSidecar(model('[]')), 'parts.v2.factfoil.json', /JSON object/);
    await rejectsUserError(async () => readSidecar(model('{"format": "other/1"}')), 'parts.v2.factfoil.json', /"format"/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "labels": 3}')), /"labels"/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "labels": ["a", ""]}')), /"labels"\[1\]/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "lables": []}')), /"lables" is not a known field/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "preprocess": {"resize": "zoom"}}')), 'parts.v2.factfoil.json', /preprocess\.resize/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "preprocess": {"std": [1, 0, 1]}}')), /preprocess\.std/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "preprocess": {"preset": "fancy"}}')), /preprocess\.preset/);
    await rejectsUserError(async () => readSidecar(model('{"format": "factfoil-model/1", "preprocess": {"mean": [0.5, 0.5]}}')), /preprocess\.mean/);
  });

  it('never replaces a malformed sidecar on read', async () => {
    const m = model('not json');
    await rejectsUserError(() => readSidecar(m));
    assert.equal(readFileSync(sidecarPath(m), 'utf8'), 'not json');
  });

  it('resolves the applied spec: input shape, then preset, then explicit fields', () => {
    const spec = resolvePreprocessSpec([1, 3, 96, 128], { preset: 'standardized', resize: 'letterbox' });
    assert.deepEqual(spec.size, [96, 128]);
    assert.equal(spec.layout, 'NCHW');
    assert.equal(spec.resize, 'letterbox');
    assert.deepEqual(spec.mean, PREPROCESS_PRESETS.standardized.mean);
    const nhwc = resolvePreprocessSpec(['batch', 'h', 'w', 3], { size: [300, 200], preset: 'bgr-mean' });
    assert.deepEqual(nhwc.size, [300, 200]);
    assert.equal(nhwc.layout, 'NHWC');
    assert.equal(nhwc.channels, 'BGR');
    throwsUserError(() => resolvePreprocessSpec([1, 3, 96, 96], { size: [64, 64] }, 'm.factfoil.json'), 'm.factfoil.json', /does not match the model input/);
    throwsUserError(() => resolvePreprocessSpec([1, 1, 28, 28], { channels: 'RGB' }, 'm.factfoil.json'), /channels/);
  });
});
