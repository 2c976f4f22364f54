import { strict as assert } from 'node:assert';
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { readRecord, writeRecord, type FactfoilRecord } from '../../../core/io/record';
import { computeGeometry, specFromInputShape } from '../../../core/image/preprocess';
import { rejectsUserError, useTempDir } from './support';

const SHA = 'a'.repeat(64);

function sampleRecord(): FactfoilRecord {
  const spec = { ...specFromInputShape([1, 3, 64, 64]), resize: 'crop' as const };
  return {
    format: 'factfoil-record/1',
    toolVersion: '0.1.0',
    createdAt: '2026-01-02T03:04:05.000Z',
    model: { path: '/m/parts.onnx', sha256: SHA, scoresTensor: 'logits', scoresFrom: 'softmax-input' },
    input: { kind: 'image', path: '/d/washer/i1.png', sha256: SHA, width: 120, height: 80 },
    preprocess: { spec, geometry: computeGeometry(120, 80, spec.size, 'crop') },
    map: { kind: 'mismatch', variant: 'weighted', layer: { id: '/layer3/Relu_output_0', shape: [1, 64, 8, 8] } },
    fact: { index: 1, label: 'washer' },
    foil: null,
    estimate: { mode: 'probe', k: 64, seed: 7 },
    normalization: { kind: 'percentile', p: 99.5, lo: 0, hi: 0.25, colormap: 'viridis', opacity: 0.6 },
    prediction: [{ index: 1, label: 'washer', p: 0.7 }, { index: 2, label: 'bearing', p: 0.2 }],
    files: { png: 'i1.mismatch.layer3.washer.png' },
  };
}

describe('core/io/record', () => {
  const tmp = useTempDir('record');

  it('round-trips through write and read', async () => {
    const file = path.join(tmp(), 'r1.json');
    const rec = sampleRecord();
    await writeRecord(file, rec);
    assert.deepEqual(await readRecord(file), rec);
  });

  it('never overwrites an existing record', async () => {
    const file = path.join(tmp(), 'r2.json');
    await writeRecord(file, sampleRecord());
    await rejectsUserError(() => writeRecord(file, sampleRecord()), 'r2.json', /already exists/);
  });

  it('names the file and the field when a record is invalid', async () => {
    const cases: [string, (r: Record<string, any>) => void, RegExp][] = [
      ['format', (r) => (r.format = 'factfoil-record/2'), /field format/],
      ['sha', (r) => (r.model.sha256 = 'xyz'), /model\.sha256/],
      ['kind', (r) => (r.map.kind = 'heat'), /map\.kind must be one of evidence/],
      ['foil', (r) => (r.foil = { index: -1, label: 'x' }), /foil\.index/],
      ['probe', (r) => (r.estimate = { mode: 'probe', k: 0, seed: 1 }), /estimate\.k/],
      ['pred', (r) => (r.prediction[1].p = 1.5), /prediction\[1\]\.p/],
      ['pre', (r) => (r.preprocess = null), /preprocess must describe/],
      ['date', (r) => (r.createdAt = 'yesterday'), /createdAt/],
    ];
    for (const [name, mutate, why] of cases) {
      const r = sampleRecord() as unknown as Record<string, any>;
      mutate(r);
      const file = path.join(tmp(), `bad-${name}.json`);
      writeFileSync(file, JSON.stringify(r));
      await rejectsUserError(() => readRecord(file), `bad-${name}.json`, why);
    }
    const broken = path.join(tmp(), 'broken.json');
    writeFileSync(broken, '{"format":');
    await rejectsUserError(() => readRecord(broken), 'broken.json', /not valid JSON/);
  });
});
