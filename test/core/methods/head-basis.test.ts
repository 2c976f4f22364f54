/**
 * The spectral seed basis of a linear head against its defining identity: with P = I − 11ᵀ/R
 * and u_j the basis rows, Σ_j (Wᵀu_j)(Wᵀu_j)ᵀ = WᵀPW (so Σ_j (Jᵀu_j)² = diag(JᵀPJ), DESIGN §4),
 * the rows are orthonormal and orthogonal to the all-ones vector, and ρ = rank(PW). The
 * reference products are plain float64 loops over the definitions.
 */
import { strict as assert } from 'node:assert';
import * as path from 'node:path';
import { Engine } from '../../../core/engine/engine';
import { findLinearHead, spectralBasis, LinearHead } from '../../../core/methods/head-basis';
import { loadModel, modelFromBytes } from '../../../core/model/load';
import { encodeModelProto, TensorType } from '../../../core/model/proto';
import { floatTensor } from '../../../core/model/tensor';
import { mulberry32 } from '../../../core/metrics/random';
import { FIXTURES } from '../../helpers';

function checkIdentity(head: LinearHead): number {
  const { weight: W, classes: R, features: D } = head;
  const basis = spectralBasis(head);
  const seeds = basis.seeds(basis.rank);
  // WᵀPW[a,b] = Σ_r W[r,a]W[r,b] − (Σ_r W[r,a])(Σ_r W[r,b])/R.
  const colSum = new Float64Array(D);
  for (let r = 0; r < R; r++) for (let d = 0; d < D; d++) colSum[d] += W[r * D + d];
  const wtw = new Float64Array(D * D), got = new Float64Array(D * D);
  for (let a = 0; a < D; a++) for (let b = 0; b < D; b++) {
    let s = 0;
    for (let r = 0; r < R; r++) s += W[r * D + a] * W[r * D + b];
    wtw[a * D + b] = s - (colSum[a] * colSum[b]) / R;
  }
  for (let j = 0; j < basis.rank; j++) {
    const u = seeds.subarray(j * R, (j + 1) * R);
    const wu = new Float64Array(D);
    for (let r = 0; r < R; r++) for (let d = 0; d < D; d++) wu[d] += W[r * D + d] * u[r];
    for (let a = 0; a < D; a++) for (let b = 0; b < D; b++) got[a * D + b] += wu[a] * wu[b];
    let sum = 0;
    for (let r = 0; r < R; r++) sum += u[r];
    assert.ok(Math.abs(sum) < 1e-5, `row ${j} is orthogonal to the all-ones vector (sum ${sum})`);
    for (let i = 0; i <= j; i++) {
      let dot = 0;
      for (let r = 0; r < R; r++) dot += u[r] * seeds[i * R + r];
      assert.ok(Math.abs(dot - (i === j ? 1 : 0)) < 1e-5, `rows ${i},${j}: ${dot}`);
    }
  }
  for (let j = 1; j < basis.rank; j++) assert.ok(basis.values[j] <= basis.values[j - 1], 'eigenvalues largest first');
  let num = 0, den = 0;
  for (let i = 0; i < D * D; i++) { num += (got[i] - wtw[i]) ** 2; den += wtw[i] ** 2; }
  assert.ok(Math.sqrt(num / den) < 1e-6, `Σ (Wᵀu)(Wᵀu)ᵀ vs WᵀPW: rel ${Math.sqrt(num / den)}`);
  return basis.rank;
}

function randomHead(R: number, D: number, seed: number): LinearHead {
  const rand = mulberry32(seed);
  return { weight: Float64Array.from({ length: R * D }, () => rand() - 0.5), classes: R, features: D, node: 'synthetic' };
}

describe('spectral basis of a linear head (WᵀPW identity)', () => {
  const engine = new Engine();
  after(() => engine.dispose());

  it('fewer classes than features: rank R − 1 (centring removes one direction)', () => {
    assert.equal(checkIdentity(randomHead(12, 30, 1)), 11);
  });

  it('more classes than features: rank D, from the feature-side Gram matrix', () => {
    assert.equal(checkIdentity(randomHead(70, 20, 2)), 20);
  });

  it('a rank-deficient head keeps only its true rank', () => {
    // W = A·B with A [40×3], B [3×25]: rank 3, and centring keeps 3 (generic A).
    const rand = mulberry32(3);
    const A = Array.from({ length: 40 * 3 }, () => rand() - 0.5), B = Array.from({ length: 3 * 25 }, () => rand() - 0.5);
    const W = new Float64Array(40 * 25);
    for (let r = 0; r < 40; r++) for (let d = 0; d < 25; d++) for (let t = 0; t < 3; t++) W[r * 25 + d] += A[r * 3 + t] * B[t * 25 + d];
    assert.equal(checkIdentity({ weight: W, classes: 40, features: 25, node: 'low-rank' }), 3);
  });

  it('reads the Gemm head of the ResNet fixture (W = B with transB) and a MatMul + Add head', async () => {
    const pm = await engine.prepare(loadModel(path.join(FIXTURES, 'arch', 'resnet', 'model.onnx')), [1, 3, 64, 64]);
    const head = findLinearHead(pm)!;
    assert.equal(head.classes, 10);
    assert.equal(head.features, 64);
    checkIdentity(head);

    // GAP → Flatten → MatMul(W [4×6]) → Add(b): the head's W is the transpose of the MatMul operand.
    const rand = mulberry32(4);
    const w = Float32Array.from({ length: 4 * 6 }, () => rand() - 0.5);
    const vi = (name: string, dims: number[]) => ({ name, type: { tensor_type: { elem_type: TensorType.FLOAT, shape: { dim: dims.map((d) => ({ dim_value: d })) } } } });
    const bytes = encodeModelProto({
      ir_version: 8, opset_import: [{ domain: '', version: 18 }],
      graph: {
        name: 'matmul-head',
        node: [
          { op_type: 'Conv', name: 'conv', input: ['x', 'k'], output: ['a'], attribute: [{ name: 'pads', type: 7, ints: [1, 1, 1, 1] }] as never },
          { op_type: 'GlobalAveragePool', name: 'gap', input: ['a'], output: ['g'] },
          { op_type: 'Flatten', name: 'flat', input: ['g'], output: ['f'] },
          { op_type: 'MatMul', name: 'fc', input: ['f', 'w'], output: ['m'] },
          { op_type: 'Add', name: 'bias', input: ['m', 'b'], output: ['z'] },
        ],
        initializer: [floatTensor('k', [4, 3, 3, 3], Float32Array.from({ length: 108 }, () => rand() - 0.5)), floatTensor('w', [4, 6], w), floatTensor('b', [6], new Float32Array(6))],
        input: [vi('x', [1, 3, 8, 8])], output: [vi('z', [1, 6])],
      },
    });
    const pm2 = await engine.prepare(modelFromBytes(bytes, 'matmul-head.onnx'), [1, 3, 8, 8]);
    const h2 = findLinearHead(pm2)!;
    assert.ok(h2, 'MatMul + Add recognised');
    for (let r = 0; r < 6; r++) for (let d = 0; d < 4; d++) assert.equal(h2.weight[r * 4 + d], w[d * 6 + r]);
    assert.equal(checkIdentity(h2), 4);
  });
});
