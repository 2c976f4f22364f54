/**
 * Every map kind end to end against PyTorch: test-fixtures/gen/make_maps.py computes the maps
 * of DESIGN §4 in float64 with torch autograd (and torch's bilinear interpolation,
 * align_corners=False, for the upsampled maps) on the seeded ResNet and MobileNetV2 fixtures;
 * here the engine computes the same maps in float32 from the exported ONNX models.
 */
import { strict as assert } from 'node:assert';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { explainMaps, MapKind, Question } from '../../../core/methods/maps';
import { loadModel } from '../../../core/model/load';
import { readNpy } from '../../../core/io/npy';
import { FIXTURES, relL2, toNumbers } from '../../helpers';

interface Entry { kind: MapKind; variant: string | null; layer: string; stem: string }
interface Refs { fact: number; foil: number; layers: string[]; size: number; entries: Entry[] }

// Bound: the engine runs in float32, the reference in float64; float32 gradients of these
// fixtures are within ~1e-6 of float64 (test/core/autodiff), and a map is a product of at most
// three such terms. 1e-4 leaves margin for the squared terms of the variance; it is the
// project's bound for gradient checks, not a published figure.
const BOUND = 1e-4;

function question(e: Entry, refs: Refs): Question {
  const q: Question = { kind: e.kind, fact: refs.fact };
  if (e.kind === 'contrast') { q.foil = refs.foil; q.contrast = e.variant as 'margin' | 'loss'; }
  if (e.kind === 'mismatch') q.mismatch = e.variant as 'weighted' | 'gradient';
  return q;
}

for (const family of ['resnet', 'mobilenet_v2']) {
  describe(`every map kind vs PyTorch float64 (${family})`, function () {
    this.timeout(60_000);
    const dir = path.join(FIXTURES, 'arch', family);
    const refs: Refs = JSON.parse(readFileSync(path.join(dir, 'maps', 'maps.json'), 'utf8'));
    const engine = new Engine();
    after(() => engine.dispose());

    const npy = async (f: string) => Float32Array.from(toNumbers((await readNpy(path.join(dir, 'maps', f))).data));

    it(`${refs.entries.length} maps at ${refs.layers.join(', ')} within relative L2 ${BOUND}, raw and upsampled`, async () => {
      const x = Float32Array.from(toNumbers((await readNpy(path.join(dir, 'input.npy'))).data));
      const pm = await engine.prepare(loadModel(path.join(dir, 'model.onnx')), [1, 3, refs.size, refs.size]);
      const worst: string[] = [];
      for (const e of refs.entries) {
        const layers = e.layer === 'input' ? refs.layers.slice(0, 1) : [e.layer];
        const maps = await explainMaps(engine, pm, x, [question(e, refs)], layers, { estimate: { mode: 'exact' } });
        const got = maps.find((m) => m.question.kind === e.kind && (e.layer === 'input' || m.layer === e.layer));
        assert.ok(got, `${e.stem}: no map returned`);
        const raw = await npy(`${e.stem}.raw.npy`);
        const errRaw = relL2(got.raw.data, raw);
        assert.ok(errRaw < BOUND, `${family} ${e.stem}: raw rel L2 ${errRaw}`);
        if (e.layer !== 'input' && e.kind !== 'guided-evidence') {
          const errUp = relL2(got.up.data, await npy(`${e.stem}.up.npy`));
          assert.ok(errUp < BOUND, `${family} ${e.stem}: upsampled rel L2 ${errUp}`);
        }
        worst.push(`${e.stem} ${errRaw.toExponential(1)}`);
      }
      if (process.env.FACTFOIL_VERBOSE) console.log(worst.join('\n'));
    });
  });
}
