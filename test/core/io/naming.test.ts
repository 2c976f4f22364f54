import { strict as assert } from 'node:assert';
import { mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import * as path from 'node:path';
import { layerShortName, mapFileStem, NAME_PART_MAX_BYTES, sanitizeNamePart, uniquePaths, writeUniqueFiles } from '../../../core/io/naming';
import { useTempDir } from './support';

describe('core/io/naming', () => {
  const tmp = useTempDir('naming');
  let n = 0;
  const freshDir = () => {
    const d = path.join(tmp(), `case${n++}`);
    mkdirSync(d);
    return d;
  };

  describe('sanitizeNamePart', () => {
    const hostile = [
      '../../etc/passwd',
      'a\\b\\..\\c',
      'hex nut',
      '  spaced   out  ',
      'tab\there\nnewline\u0000nul\u001b[31mred',
      '-rf',
      '..',
      '.',
      '',
      '///',
      'CON',
      'lpt1',
      'a:b*c?d"e<f>g|h',
      'x'.repeat(500),
      'ü'.repeat(300),
      '\u202Egnp.exe', // right-to-left override
    ];

    it('never yields separators, dots, control characters, reserved names or over-long parts', () => {
      for (const label of hostile) {
        const s = sanitizeNamePart(label);
        assert.ok(s.length > 0, `empty for ${JSON.stringify(label)}`);
        assert.ok(!/[/\\.:*?"<>|]/.test(s), `${JSON.stringify(label)} → ${s}`);
        assert.ok(!/[\u0000-\u001f\u007f-\u009f\u202a-\u202e]/.test(s), `${JSON.stringify(label)} → control char in ${JSON.stringify(s)}`);
        assert.ok(!/^-/.test(s), `leading dash: ${s}`);
        assert.ok(!/^(con|prn|aux|nul|com\d|lpt\d)$/i.test(s), `reserved: ${s}`);
        assert.ok(Buffer.byteLength(s) <= NAME_PART_MAX_BYTES, `too long: ${Buffer.byteLength(s)} bytes`);
      }
    });

    it('is deterministic and readable', () => {
      assert.equal(sanitizeNamePart('hex nut'), 'hex_nut');
      assert.equal(sanitizeNamePart('hex-nut'), 'hex-nut');
      assert.equal(sanitizeNamePart('../../etc/passwd'), 'etc_passwd');
      assert.equal(sanitizeNamePart('Zahnrad (groß)'), 'Zahnrad_groß');
      assert.equal(sanitizeNamePart('CON'), 'CON_');
      assert.equal(sanitizeNamePart(''), 'unnamed');
      assert.equal(sanitizeNamePart('x'.repeat(500)), sanitizeNamePart('x'.repeat(500)));
    });

    it('keeps long labels that share a prefix apart', () => {
      const a = sanitizeNamePart('a very long label that goes on and on about the first kind of part');
      const b = sanitizeNamePart('a very long label that goes on and on about the second kind of part');
      assert.notEqual(a, b);
      assert.match(a, /~[0-9a-f]{8}$/);
    });
  });

  it('builds <stem>.<map>.<layer-short>.<fact>[-vs-<foil>] (DESIGN §6)', () => {
    assert.equal(mapFileStem({ imagePath: '/data/washer/img_007.png', map: 'evidence', layerShort: 'layer3', fact: 'washer' }), 'img_007.evidence.layer3.washer');
    assert.equal(
      mapFileStem({ imagePath: 'belt 12.jpeg', map: 'contrast', layerShort: 'stage2', fact: 'hex nut', foil: '../washer' }),
      'belt_12.contrast.stage2.hex_nut-vs-washer',
    );
    const stem = mapFileStem({ imagePath: 'p.png', map: 'mismatch', layerShort: 'l'.repeat(300), fact: 'f'.repeat(300), foil: 'g'.repeat(300) });
    assert.ok(Buffer.byteLength(stem + '-9999.json') < 255);
  });

  it('shortens exporter tensor names readably', () => {
    assert.equal(layerShortName('/layer2/layer2.1/relu_1/Relu_output_0'), 'layer2_1-relu_1');
    assert.equal(layerShortName('/features/features.3/Add_output_0'), 'features_3-Add');
    assert.equal(layerShortName('model/conv2d_3/Relu:0'), 'conv2d_3-Relu');
    assert.equal(layerShortName('stage3'), 'stage3');
    assert.equal(layerShortName('onnx::Conv_123'), 'onnx_Conv_123');
  });

  it('appends -2, -3 … to the whole set when any member exists', () => {
    const dir = freshDir();
    const exts = ['.png', '.json'];
    assert.deepEqual(uniquePaths(dir, 'a.evidence.l.x', exts).paths, [path.join(dir, 'a.evidence.l.x.png'), path.join(dir, 'a.evidence.l.x.json')]);
    writeFileSync(path.join(dir, 'a.evidence.l.x.json'), '{}'); // only the record exists
    assert.equal(uniquePaths(dir, 'a.evidence.l.x', exts).stem, 'a.evidence.l.x-2');
    writeFileSync(path.join(dir, 'a.evidence.l.x-2.png'), '');
    assert.equal(uniquePaths(dir, 'a.evidence.l.x', exts).stem, 'a.evidence.l.x-3');
  });

  it('writes file sets that never overwrite, even when writers race', async () => {
    const dir = freshDir();
    writeFileSync(path.join(dir, 's.png'), 'precious');
    const sets = await Promise.all(
      Array.from({ length: 12 }, (_, i) =>
        writeUniqueFiles(dir, 's', ['.png', '.json'], (chosen) => [`png ${i}`, JSON.stringify({ png: path.basename(chosen.paths[0]), i })]),
      ),
    );
    const stems = sets.map((s) => s.stem);
    assert.equal(new Set(stems).size, 12, 'every writer got its own stem');
    assert.equal(readFileSync(path.join(dir, 's.png'), 'utf8'), 'precious');
    for (const s of sets) {
      const rec = JSON.parse(readFileSync(s.paths[1], 'utf8'));
      assert.equal(rec.png, path.basename(s.paths[0]), 'the record names its own PNG');
      assert.equal(readFileSync(s.paths[0], 'utf8'), `png ${rec.i}`);
    }
    assert.equal(readdirSync(dir).length, 1 + 24, 'no temporary or orphaned files');
  });
});
