/**
 * The partial symmetric eigensolver against an independent general-purpose library: ml-matrix's
 * full decomposition (a port of the classic EISPACK tred2/tql2 routines) on random symmetric
 * matrices, a Gram matrix with a repeated eigenvalue and a rank-deficient one. Eigenvalues agree
 * to float64 round-off of ‖A‖; vectors satisfy A·v = λ·v and are orthonormal, also inside a
 * repeated eigenvalue where the vectors themselves are not unique.
 */
import { strict as assert } from 'node:assert';
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { SymmetricEigen } from '../../../core/methods/symmetric-eigen';
import { mulberry32 } from '../../../core/metrics/random';

function reference(a: Float64Array, n: number): number[] {
  const rows = Array.from({ length: n }, (_, i) => Array.from(a.subarray(i * n, (i + 1) * n)));
  return [...new EigenvalueDecomposition(new Matrix(rows), { assumeSymmetric: true }).realEigenvalues].sort((x, y) => y - x);
}

function check(a: Float64Array, n: number, vectors: number): void {
  const eig = new SymmetricEigen(a, n);
  const ref = reference(a, n);
  const scale = Math.max(...ref.map(Math.abs), 1e-300);
  for (let j = 0; j < n; j++) assert.ok(Math.abs(eig.values[j] - ref[j]) <= 1e-12 * scale, `λ${j}: ${eig.values[j]} vs ml-matrix ${ref[j]}`);
  const vs = Array.from({ length: vectors }, (_, j) => eig.vector(j));
  vs.forEach((v, j) => {
    let res = 0;
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let t = 0; t < n; t++) s += a[i * n + t] * v[t];
      res = Math.max(res, Math.abs(s - eig.values[j] * v[i]));
    }
    assert.ok(res <= 1e-10 * scale, `‖A·v − λ·v‖∞ of vector ${j}: ${res}`);
    for (let i = 0; i <= j; i++) {
      let dot = 0;
      for (let t = 0; t < n; t++) dot += vs[i][t] * v[t];
      assert.ok(Math.abs(dot - (i === j ? 1 : 0)) < 1e-10, `vectors ${i}·${j} = ${dot}`);
    }
  });
}

function symmetric(n: number, seed: number): Float64Array {
  const rand = mulberry32(seed);
  const a = new Float64Array(n * n);
  for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) a[i * n + j] = a[j * n + i] = rand() - 0.5;
  return a;
}

/** X·Xᵀ for n random rows of length L: rank L when L < n. */
function gram(n: number, L: number, seed: number): Float64Array {
  const rand = mulberry32(seed);
  const x = Float64Array.from({ length: n * L }, () => rand() - 0.5);
  const g = new Float64Array(n * n);
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) { let s = 0; for (let d = 0; d < L; d++) s += x[i * L + d] * x[j * L + d]; g[i * n + j] = s; }
  return g;
}

describe('symmetric eigenvalues and chosen eigenvectors (vs ml-matrix)', () => {
  it('random symmetric matrices of several sizes, every vector', () => {
    for (const [n, seed] of [[1, 1], [2, 2], [3, 3], [17, 4], [60, 5]]) check(symmetric(n, seed), n, n);
  });
  it('a rank-deficient Gram matrix (rank 5 of 40): the zero eigenvalues and the leading vectors', () => {
    check(gram(40, 5, 6), 40, 5);
  });
  it('a repeated eigenvalue: I + a rank-2 term gives 1 twenty-eight times; the vectors stay orthonormal', () => {
    const n = 30;
    const g = gram(n, 2, 7);
    for (let i = 0; i < n; i++) g[i * n + i] += 1;
    check(g, n, n);
  });
  it('a diagonal matrix and the zero matrix (nothing to reduce)', () => {
    const d = new Float64Array(16);
    [3, -1, 2, 0.5].forEach((v, i) => { d[i * 4 + i] = v; });
    check(d, 4, 4);
    const eig = new SymmetricEigen(new Float64Array(9), 3);
    assert.deepEqual([...eig.values], [0, 0, 0]);
    assert.deepEqual([eig.vector(0), eig.vector(1), eig.vector(2)].map((v) => [...v]), [[1, 0, 0], [0, 1, 0], [0, 0, 1]]);
  });
});
