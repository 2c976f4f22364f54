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
});
