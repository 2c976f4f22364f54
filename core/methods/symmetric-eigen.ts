/**
 * Eigenvalues of a real symmetric matrix, and eigenvectors only for the ones asked for.
 *
 * The head basis needs every eigenvalue (for the rank and the spectrum's total) but at most a
 * few dozen eigenvectors for a probe, and a full decomposition of a 1000×1000 Gram matrix took
 * 13 s in JavaScript (ml-matrix, the bench's ResNet-50 head, 4 Dec 2026). So: Householder reduction to tridiagonal form
 * (≈ 2n³ flops, no accumulated transform), every eigenvalue by Sturm-count bisection, and each
 * wanted eigenvector by inverse iteration on the tridiagonal matrix, orthogonalised against
 * earlier vectors of nearby eigenvalues, then carried back through the stored reflectors. These
 * are the textbook methods (Golub & Van Loan, Matrix Computations, §8.3–8.5, recalled); the
 * tests check them against ml-matrix's full decomposition.
 */
import { mulberry32 } from '../metrics/random';

export class SymmetricEigen {
  /** Every eigenvalue, largest first. */
  readonly values: Float64Array;
  readonly n: number;
  private readonly diag: Float64Array;
  private readonly off: Float64Array; // off[i] couples rows i and i+1 of the tridiagonal matrix
  private readonly reflectors: Float64Array[]; // reflectors[k] acts on indices k+1 … n−1
  private readonly norm: number;
  private readonly tridiagonalVectors: Float64Array[] = [];

  /** a: n×n row-major, symmetric (only read; copied). */
  constructor(a: Float64Array, n: number) {
    this.n = n;
    const { diag, off, reflectors } = tridiagonalize(Float64Array.from(a), n);
    this.diag = diag;
    this.off = off;
    this.reflectors = reflectors;
    let norm = 0;
    for (let i = 0; i < n; i++) norm = Math.max(norm, Math.abs(diag[i]) + (i > 0 ? Math.abs(off[i - 1]) : 0) + (i < n - 1 ? Math.abs(off[i]) : 0));
    this.norm = norm;
    this.values = allEigenvalues(diag, off, norm);
  }

  /** The unit eigenvector of values[j]; vectors are computed in order, so ask for j = 0, 1, … */
  vector(j: number): Float64Array {
    for (let i = this.tridiagonalVectors.length; i <= j; i++) this.tridiagonalVectors.push(this.inverseIteration(i));
    return this.backTransform(this.tridiagonalVectors[j]);
  }

  private inverseIteration(j: number): Float64Array {
    const { n, diag, off, norm } = this;
    if (norm === 0) { const e = new Float64Array(n); e[j] = 1; return e; } // the zero matrix: any basis
    const lambda = this.values[j];
    const lu = factorShifted(diag, off, lambda, Math.max(norm, Number.MIN_VALUE) * Number.EPSILON);
    // Vectors of eigenvalues closer than this are made orthogonal explicitly (the usual
    // cluster criterion of inverse-iteration codes, 1e-3·‖T‖; common practice, no source here).
    const cluster: Float64Array[] = [];
    for (let i = 0; i < j; i++) if (Math.abs(this.values[i] - lambda) <= 1e-3 * norm) cluster.push(this.tridiagonalVectors[i]);
    const rand = mulberry32(1009 + j);
    let y: Float64Array = Float64Array.from({ length: n }, () => rand() - 0.5);
    for (let it = 0; it < 4; it++) {
      orthogonalize(y, cluster);
      normalize(y);
      y = solveFactored(lu, y);
    }
    orthogonalize(y, cluster);
    orthogonalize(y, cluster); // twice is enough (Kahan–Parlett)
    normalize(y);
    return y;
  }

  private backTransform(y: Float64Array): Float64Array {
    const x = Float64Array.from(y);
    for (let k = this.reflectors.length - 1; k >= 0; k--) {
      const v = this.reflectors[k];
      let dot = 0;
      for (let i = 0; i < v.length; i++) dot += v[i] * x[k + 1 + i];
      dot *= 2;
      for (let i = 0; i < v.length; i++) x[k + 1 + i] -= dot * v[i];
    }
    return x;
  }
}

/** A = Q·T·Qᵀ with Q = H_0·H_1·…, H_k = I − 2v_kv_kᵀ (unit v_k); reads and overwrites a's lower triangle. */
function tridiagonalize(a: Float64Array, n: number): { diag: Float64Array; off: Float64Array; reflectors: Float64Array[] } {
  const diag = new Float64Array(n), off = new Float64Array(Math.max(n - 1, 0));
  const reflectors: Float64Array[] = [];
  const p = new Float64Array(n);
  for (let k = 0; k < n - 2; k++) {
    const m = n - k - 1; // the trailing block is rows/columns k+1 … n−1
    const v = new Float64Array(m);
    let norm = 0;
    for (let i = 0; i < m; i++) { v[i] = a[(k + 1 + i) * n + k]; norm += v[i] * v[i]; }
    norm = Math.sqrt(norm);
    diag[k] = a[k * n + k];
    if (norm === 0) { off[k] = 0; reflectors.push(new Float64Array(m)); continue; }
    const alpha = v[0] > 0 ? -norm : norm;
    off[k] = alpha;
    v[0] -= alpha;
    let vnorm = 0;
    for (let i = 0; i < m; i++) vnorm += v[i] * v[i];
    vnorm = Math.sqrt(vnorm);
    for (let i = 0; i < m; i++) v[i] /= vnorm;
    // B ← H·B·H = B − 2(v·wᵀ + w·vᵀ) with w = B·v − (vᵀB·v)·v, on the lower triangle only
    // (half the memory traffic, which bounds this loop once the matrix outgrows the cache).
    p.fill(0, 0, m);
    for (let i = 0; i < m; i++) {
      const row = (k + 1 + i) * n + k + 1;
      const vi = v[i];
      let s = 0;
      for (let t = 0; t < i; t++) { const x = a[row + t]; s += x * v[t]; p[t] += x * vi; }
      p[i] += s + a[row + i] * vi;
    }
    let c = 0;
    for (let i = 0; i < m; i++) c += p[i] * v[i];
    for (let i = 0; i < m; i++) p[i] -= c * v[i];
    for (let i = 0; i < m; i++) {
      const row = (k + 1 + i) * n + k + 1;
      const vi = 2 * v[i], wi = 2 * p[i];
      for (let t = 0; t <= i; t++) a[row + t] -= vi * p[t] + wi * v[t];
    }
    reflectors.push(v);
  }
  if (n >= 2) {
    diag[n - 2] = a[(n - 2) * n + n - 2];
    off[n - 2] = a[(n - 1) * n + n - 2];
  }
  if (n >= 1) diag[n - 1] = a[(n - 1) * n + n - 1];
  return { diag, off, reflectors };
}

/** How many eigenvalues of the tridiagonal matrix are below x (Sturm sequence). */
function countBelow(diag: Float64Array, off: Float64Array, x: number, tiny: number): number {
  let count = 0, q = 1;
  for (let i = 0; i < diag.length; i++) {
    const e2 = i > 0 ? off[i - 1] * off[i - 1] : 0;
    q = diag[i] - x - (i > 0 ? e2 / q : 0);
    if (q === 0) q = -tiny;
    if (q < 0) count++;
  }
  return count;
}

/** Every eigenvalue by bisection, largest first, to a few ulps of ‖T‖. */
function allEigenvalues(diag: Float64Array, off: Float64Array, norm: number): Float64Array {
  const n = diag.length;
  const values = new Float64Array(n);
  if (n === 0) return values;
  const tiny = Math.max(norm, Number.MIN_VALUE) * Number.EPSILON * Number.EPSILON;
  let lo0 = -norm, hi0 = norm;
  if (norm === 0) return values;
  lo0 -= norm * 1e-12; hi0 += norm * 1e-12;
  const tol = 2 * Number.EPSILON * norm;
  // values[j] (largest first) is the (n−1−j)-th smallest: the x where countBelow crosses n−1−j.
  let hiBound = hi0;
  for (let j = 0; j < n; j++) {
    const rank = n - 1 - j; // eigenvalues strictly below the answer
    let lo = lo0, hi = hiBound;
    while (hi - lo > tol) {
      const mid = 0.5 * (lo + hi);
      if (mid === lo || mid === hi) break;
      if (countBelow(diag, off, mid, tiny) > rank) hi = mid; else lo = mid;
    }
    values[j] = 0.5 * (lo + hi);
    hiBound = hi;
  }
  return values;
}

interface TridiagonalLU { d: Float64Array; du: Float64Array; du2: Float64Array; dl: Float64Array; swapped: Uint8Array }

/** LU with partial pivoting of T − λI (as LAPACK's general tridiagonal factorisation); zero pivots become `tiny`. */
function factorShifted(diag: Float64Array, off: Float64Array, lambda: number, tiny: number): TridiagonalLU {
  const n = diag.length;
  const d = Float64Array.from(diag, (x) => x - lambda);
  const du = Float64Array.from(off), dl = Float64Array.from(off);
  const du2 = new Float64Array(Math.max(n - 2, 0));
  const swapped = new Uint8Array(Math.max(n - 1, 0));
  for (let i = 0; i < n - 1; i++) {
    if (Math.abs(d[i]) >= Math.abs(dl[i])) {
      if (d[i] === 0) d[i] = tiny;
      const f = dl[i] / d[i];
      dl[i] = f;
      d[i + 1] -= f * du[i];
    } else {
      const f = d[i] / dl[i];
      d[i] = dl[i];
      dl[i] = f;
      const t = du[i];
      du[i] = d[i + 1];
      d[i + 1] = t - f * d[i + 1];
      if (i < n - 2) { du2[i] = du[i + 1]; du[i + 1] = -f * du[i + 1]; }
      swapped[i] = 1;
    }
  }
  for (let i = 0; i < n; i++) if (Math.abs(d[i]) < tiny) d[i] = d[i] < 0 ? -tiny : tiny;
  return { d, du, du2, dl, swapped };
}

function solveFactored(lu: TridiagonalLU, rhs: Float64Array): Float64Array {
  const { d, du, du2, dl, swapped } = lu;
  const n = d.length;
  const b = Float64Array.from(rhs);
  for (let i = 0; i < n - 1; i++) {
    if (!swapped[i]) b[i + 1] -= dl[i] * b[i];
    else { const t = b[i]; b[i] = b[i + 1]; b[i + 1] = t - dl[i] * b[i]; }
  }
  b[n - 1] /= d[n - 1];
  if (n > 1) b[n - 2] = (b[n - 2] - du[n - 2] * b[n - 1]) / d[n - 2];
  for (let i = n - 3; i >= 0; i--) b[i] = (b[i] - du[i] * b[i + 1] - du2[i] * b[i + 2]) / d[i];
  return b;
}

function orthogonalize(y: Float64Array, against: Float64Array[]): void {
  for (const u of against) {
    let dot = 0;
    for (let i = 0; i < y.length; i++) dot += u[i] * y[i];
    for (let i = 0; i < y.length; i++) y[i] -= dot * u[i];
  }
}

function normalize(y: Float64Array): void {
  let s = 0;
  for (const x of y) s += x * x;
  s = Math.sqrt(s);
  if (s === 0 || !Number.isFinite(s)) {
    // Overflow from a near-exact shift: rescale by the largest entry first.
    let big = 0;
    for (const x of y) big = Math.max(big, Math.abs(x));
    if (!Number.isFinite(big) || big === 0) { y.fill(0); y[0] = 1; return; }
    for (let i = 0; i < y.length; i++) y[i] /= big;
    s = 0;
    for (const x of y) s += x * x;
    s = Math.sqrt(s);
  }
  for (let i = 0; i < y.length; i++) y[i] /= s;
}
