/**
 * The bounded fuzz run of `npm test` (issue 7, item 6): seeded mutations of the fixture models and
 * of images in every raster format, each through load → analyse → layers → a map (or decode →
 * preprocess) in a worker process under a time limit. Every case must end in success or a
 * UserError. A fixed seed keeps CI reproducible; `npm run fuzz -- --cases N --seed S` runs more.
 */
import { strict as assert } from 'node:assert';
import { runFuzz, summarize } from './harness';

const CI_CASES = 5000;
const CI_SEED = 7;

describe('fuzz (bounded CI run)', () => {
  it(`${CI_CASES} mutated models and images (seed ${CI_SEED}) end in success or a UserError`, async function () {
    this.timeout(600_000);
    const r = await runFuzz({ cases: CI_CASES, seed: CI_SEED, workers: 2, timeoutMs: 60_000 });
    console.log(`      ${summarize(r).split('\n').join('\n      ')}`);
    assert.equal(r.failures.length, 0, summarize(r));
    assert.equal(r.ok + r.userErrors, CI_CASES);
    // The run must reach deep: many cases survive loading, and the errors are specific, not one catch-all.
    assert.ok(r.ok > CI_CASES / 10, `only ${r.ok} cases succeeded`);
    assert.ok(r.distinctMessages.size > 100, `only ${r.distinctMessages.size} distinct messages`);
  });
});
