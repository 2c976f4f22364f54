/**
 * Fuzz findings kept as fixtures (test-fixtures/fuzz-regressions/, minimized and rebuilt by its
 * make.py): each replays in a worker process and must end in success or a UserError — never a
 * crash, hang or other exception.
 */
import { strict as assert } from 'node:assert';
import { readdirSync } from 'node:fs';
import * as path from 'node:path';
import { replayFiles, summarize } from './harness';
import { FIXTURES } from '../helpers';

const DIR = path.join(FIXTURES, 'fuzz-regressions');

describe('fuzz regressions', () => {
  const files = readdirSync(DIR).filter((f) => !/\.(txt|py)$/.test(f)).sort().map((f) => path.join(DIR, f));

  it(`replays the ${files.length} kept inputs without a crash, hang or unexpected exception`, async () => {
    assert.ok(files.length > 0, 'no regression fixtures found');
    const r = await replayFiles(files, { timeoutMs: 60_000 });
    assert.equal(r.failures.length, 0, summarize(r));
    assert.equal(r.ok + r.userErrors, files.length);
  });

  it('the LayerNormalization with an empty bias name (fuzz seed 1087) now loads and gives a map', async () => {
    const r = await replayFiles([path.join(DIR, 'layernorm-empty-bias.onnx')], { timeoutMs: 60_000 });
    assert.equal(r.ok, 1, summarize(r));
  });

  it('the 64×65535 input (fuzz seed 201553) is refused at load instead of running past the time limit', async () => {
    const r = await replayFiles([path.join(DIR, 'huge-input-side.onnx')], { timeoutMs: 60_000 });
    assert.equal(r.userErrors, 1, summarize(r));
    assert.match([...r.distinctMessages.keys()][0], /dimension 3 is 65535, over the 8192/);
  });

  it('a tensor pooled to height 0 (fuzz seed 300285) is a UserError from the shape probe, not a SIGFPE', async () => {
    const r = await replayFiles([path.join(DIR, 'zero-height-after-pooling.onnx')], { timeoutMs: 60_000 });
    assert.equal(r.userErrors, 1, summarize(r));
    assert.match([...r.distinctMessages.keys()][0], /shape probe.*'squeeze'/);
  });
});
