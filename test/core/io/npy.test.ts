import { strict as assert } from 'node:assert';
import { readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { encodeNpy, parseNpy, readNpy, writeNpy } from '../../../core/io/npy';
import { rejectsUserError, requirePython, runPython, throwsUserError, useTempDir } from './support';

describe('core/io/npy', () => {
  const tmp = useTempDir('npy');

  // Reference: files written by NumPy itself (numpy.save / numpy.lib.format.write_array).
  it('reads every supported dtype and shape written by NumPy (1.0 and 2.0 headers)', async function () {
    requirePython(this, 'numpy');
    const dir = tmp();
    runPython(
      `
import numpy as np, sys
from numpy.lib import format as F
d = sys.argv[1]
np.save(d + '/f4.npy', (np.arange(24, dtype=np.float32) * 0.25 - 3).reshape(2, 3, 4))
np.save(d + '/f8.npy', np.array([1e-300, -2.5, np.pi]))
np.save(d + '/i8.npy', np.array([[-(2**40), 7], [0, 2**62]], dtype=np.int64))
np.save(d + '/i4.npy', np.array([-5, 0, 2**31 - 1], dtype=np.int32))
np.save(d + '/u1.npy', np.arange(250, 256, dtype=np.uint8))
np.save(d + '/b1.npy', np.array([True, False, True]))
np.save(d + '/scalar.npy', np.float32(1.5))
np.save(d + '/empty.npy', np.zeros((0, 3), dtype=np.float32))
with open(d + '/v2.npy', 'wb') as f:
    F.write_array(f, np.arange(6, dtype=np.float32).reshape(3, 2), version=(2, 0))
np.save(d + '/fortran.npy', np.asfortranarray(np.arange(6, dtype=np.float32).reshape(2, 3)))
np.save(d + '/big.npy', np.arange(3, dtype='>f4'))
`,
      [dir],
    );
    const f4 = await readNpy(path.join(dir, 'f4.npy'));
    assert.equal(f4.dtype, '<f4');
    assert.deepEqual(f4.shape, [2, 3, 4]);
    assert.deepEqual(Array.from(f4.data as Float32Array), Array.from({ length: 24 }, (_, i) => i * 0.25 - 3));
    const f8 = await readNpy(path.join(dir, 'f8.npy'));
    assert.deepEqual(Array.from(f8.data as Float64Array), [1e-300, -2.5, Math.PI]);
    const i8 = await readNpy(path.join(dir, 'i8.npy'));
    assert.deepEqual(i8.shape, [2, 2]);
    assert.deepEqual(Array.from(i8.data as BigInt64Array), [-(2n ** 40n), 7n, 0n, 2n ** 62n]);
    assert.deepEqual(Array.from((await readNpy(path.join(dir, 'i4.npy'))).data as Int32Array), [-5, 0, 2 ** 31 - 1]);
    const u1 = await readNpy(path.join(dir, 'u1.npy'));
    assert.equal(u1.dtype, '|u1');
    assert.deepEqual(Array.from(u1.data as Uint8Array), [250, 251, 252, 253, 254, 255]);
    const b1 = await readNpy(path.join(dir, 'b1.npy'));
    assert.equal(b1.dtype, '|b1');
    assert.deepEqual(Array.from(b1.data as Uint8Array), [1, 0, 1]);
    const scalar = await readNpy(path.join(dir, 'scalar.npy'));
    assert.deepEqual(scalar.shape, []);
    assert.deepEqual(Array.from(scalar.data as Float32Array), [1.5]);
    const empty = await readNpy(path.join(dir, 'empty.npy'));
    assert.deepEqual(empty.shape, [0, 3]);
    assert.equal(empty.data.length, 0);
    const v2 = await readNpy(path.join(dir, 'v2.npy'));
    assert.equal(readFileSync(path.join(dir, 'v2.npy'))[6], 2, 'NumPy wrote a 2.0 header');
    assert.deepEqual(v2.shape, [3, 2]);
    assert.deepEqual(Array.from(v2.data as Float32Array), [0, 1, 2, 3, 4, 5]);
    await rejectsUserError(() => readNpy(path.join(dir, 'fortran.npy')), 'fortran.npy', /Fortran order/);
    await rejectsUserError(() => readNpy(path.join(dir, 'big.npy')), 'big.npy', "'>f4'");
  });

  it('writes files NumPy loads with the same dtype, shape and values', async function () {
    requirePython(this, 'numpy');
    const dir = tmp();
    const a = new Float32Array([0.1, -2, 3.5e-8, 1e30, -0, 7]);
    const b = new Float64Array([Math.PI, -1 / 3, 1e-310]);
    await writeNpy(path.join(dir, 'a.npy'), a, [2, 3]);
    await writeNpy(path.join(dir, 'b.npy'), b, [3]);
    await writeNpy(path.join(dir, 'c.npy'), new Float32Array([4]), []);
    const out = runPython(
      `
import numpy as np, sys, json
d = sys.argv[1]
r = {}
for n in ['a', 'b', 'c']:
    x = np.load(d + '/' + n + '.npy')
    r[n] = {'dtype': x.dtype.str, 'shape': list(x.shape), 'hex': x.tobytes().hex(), 'c': bool(x.flags['C_CONTIGUOUS'])}
print(json.dumps(r))
`,
      [dir],
    ).toString();
    const r = JSON.parse(out);
    assert.deepEqual(r.a, { dtype: '<f4', shape: [2, 3], hex: Buffer.from(a.buffer).toString('hex'), c: true });
    assert.deepEqual(r.b, { dtype: '<f8', shape: [3], hex: Buffer.from(b.buffer).toString('hex'), c: true });
    assert.deepEqual(r.c.shape, []);
  });

  it('pads the 1.0 header so the data starts at a multiple of 64 bytes (numpy.lib.format)', () => {
    for (const shape of [[1], [3, 4], [2, 3, 5, 7], []]) {
      const n = shape.reduce((x, y) => x * y, 1);
      const buf = encodeNpy(new Float32Array(n), shape);
      const headerLen = buf.readUInt16LE(8);
      assert.equal((10 + headerLen) % 64, 0);
      assert.equal(buf[10 + headerLen - 1], 0x0a, 'header ends with a newline');
      assert.equal(buf.length, 10 + headerLen + 4 * n);
    }
  });

  it('round-trips float32 and float64 through encode/parse', () => {
    const a = new Float32Array([1, 2, 3, 4, 5, 6]);
    const r = parseNpy(encodeNpy(a, [3, 2]), 'mem');
    assert.deepEqual(r.shape, [3, 2]);
    assert.deepEqual(Array.from(r.data as Float32Array), Array.from(a));
    const b = new Float64Array([-1.5, 2 ** -1074]);
    assert.deepEqual(Array.from(parseNpy(encodeNpy(b, [2]), 'mem').data as Float64Array), Array.from(b));
  });

  it('refuses malformed files with a one-line error naming the file', async () => {
    const dir = tmp();
    const good = encodeNpy(new Float32Array([1, 2, 3]), [3]);
    const cases: [string, Buffer, RegExp][] = [
      ['magic.npy', Buffer.from('PK\x03\x04 not numpy at all'), /magic/],
      ['cut.npy', good.subarray(0, good.length - 2), /cut short/],
      ['header.npy', good.subarray(0, 20), /cut short/],
      ['version.npy', Buffer.concat([good.subarray(0, 6), Buffer.from([9, 0]), good.subarray(8)]), /version 9/],
    ];
    for (const [name, bytes, why] of cases) {
      writeFileSync(path.join(dir, name), bytes);
      await rejectsUserError(() => readNpy(path.join(dir, name)), name, why);
    }
    await rejectsUserError(() => readNpy(path.join(dir, 'missing.npy')), 'missing.npy', /no such file/);
    const bad = Buffer.from(good);
    bad.write("'descr': '<c8'", 11, 'latin1');
    throwsUserError(() => parseNpy(bad, 'complex.npy'), 'complex.npy', /not supported/);
  });

  it('never overwrites unless asked', async () => {
    const file = path.join(tmp(), 'keep.npy');
    await writeNpy(file, new Float32Array([1]), [1]);
    await rejectsUserError(() => writeNpy(file, new Float32Array([2]), [1]), /will not overwrite/);
    assert.deepEqual(Array.from((await readNpy(file)).data as Float32Array), [1]);
    await writeNpy(file, new Float32Array([2]), [1], { overwrite: true });
    assert.deepEqual(Array.from((await readNpy(file)).data as Float32Array), [2]);
  });
});
