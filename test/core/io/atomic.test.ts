import { strict as assert } from 'node:assert';
import { mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { writeFileAtomic, writeFileAtomicReplace } from '../../../core/io/atomic';
import { rejectsUserError, useTempDir } from './support';

describe('core/io/atomic', () => {
  const tmp = useTempDir('atomic');
  let n = 0;
  const freshDir = () => {
    const d = path.join(tmp(), `case${n++}`);
    mkdirSync(d);
    return d;
  };

  it('writes a new file and leaves no temporary file behind', async () => {
    const dir = freshDir();
    await writeFileAtomic(path.join(dir, 'a.png'), Buffer.from([1, 2, 3]));
    assert.deepEqual(readdirSync(dir), ['a.png']);
    assert.deepEqual([...readFileSync(path.join(dir, 'a.png'))], [1, 2, 3]);
  });

  it('refuses to overwrite by default, keeps the old bytes and leaves no temporary file', async () => {
    const dir = freshDir();
    const file = path.join(dir, 'a.json');
    writeFileSync(file, 'old');
    await rejectsUserError(() => writeFileAtomic(file, 'new'), 'a.json', /already exists/);
    assert.equal(readFileSync(file, 'utf8'), 'old');
    assert.deepEqual(readdirSync(dir), ['a.json']);
  });

  it('lets exactly one of many concurrent no-overwrite writers win', async () => {
    const dir = freshDir();
    const file = path.join(dir, 'race.txt');
    const results = await Promise.allSettled(Array.from({ length: 16 }, (_, i) => writeFileAtomic(file, `writer ${i}`)));
    const won = results.filter((r) => r.status === 'fulfilled');
    assert.equal(won.length, 1);
    const winner = results.findIndex((r) => r.status === 'fulfilled');
    assert.equal(readFileSync(file, 'utf8'), `writer ${winner}`);
    assert.deepEqual(readdirSync(dir), ['race.txt']);
  });

  it('replaces atomically when asked (sidecars)', async () => {
    const dir = freshDir();
    const file = path.join(dir, 'm.factfoil.json');
    writeFileSync(file, 'old');
    await writeFileAtomicReplace(file, 'new');
    assert.equal(readFileSync(file, 'utf8'), 'new');
    assert.deepEqual(readdirSync(dir), ['m.factfoil.json']);
  });

  it('names the file when its folder does not exist', async () => {
    const file = path.join(tmp(), 'no-such-folder', 'x.png');
    await rejectsUserError(() => writeFileAtomic(file, 'x'), 'x.png', /folder does not exist/);
  });
});
