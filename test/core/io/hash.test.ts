import { strict as assert } from 'node:assert';
import { writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { sha256File } from '../../../core/io/hash';
import { rejectsUserError, useTempDir } from './support';

describe('core/io/hash', () => {
  const tmp = useTempDir('hash');

  it('matches the FIPS 180-2 SHA-256 examples', async () => {
    // Reference: FIPS 180-2, appendix B.1 ("abc") and the empty-message digest.
    const abc = path.join(tmp(), 'abc.bin');
    writeFileSync(abc, 'abc');
    assert.equal(await sha256File(abc), 'ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad');
    const empty = path.join(tmp(), 'empty.bin');
    writeFileSync(empty, '');
    assert.equal(await sha256File(empty), 'e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855');
  });

  it('names a missing file', async () => {
    await rejectsUserError(() => sha256File(path.join(tmp(), 'gone.onnx')), 'gone.onnx', /no such file/);
  });
});
