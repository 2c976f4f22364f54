/**
 * The spectral seed basis of a linear classifier head (DESIGN §4, exact and probe mismatch).
 *
 * When the scores are z = W·f + b with constant W (a Gemm or MatMul(+Add) after pooling), the
 * gradient at any layer is Jᵀv = J_fᵀ·Wᵀv, and the variance term of the mismatch statistics is
 * R·σ² = Σ_r (Jᵀ(e_r − 1/R))² = diag(Jᵀ P J) with P = I − 11ᵀ/R. With M = P·W (the class-centred
 * weights) and M = U·S·Vᵀ, JᵀPJ = J_fᵀ MᵀM J_f = Σ_j (Jᵀu_j)(Jᵀu_j)ᵀ, so the ρ = rank(M) left
 * singular vectors u_j, fed as seeds at the scores, give the exact statistic in ρ ≤ min(R−1, D)
 * runs instead of R; the top k of them (largest λ_j = s_j²) give a deterministic lower bound whose
 * missing part Σ_{j>k} (Jᵀu_j)² is a sum of squares.
 */
import { attrFloat, attrInt } from '../model/graph';
import { PreparedModel } from '../plan/prepared';
import { SymmetricEigen } from './symmetric-eigen';

export interface LinearHead {
  /** W as R rows of D features, row-major, float64. */
  weight: Float64Array;
  classes: number;
  features: number;
  /** The node that applies W. */
  node: string;
}

export interface HeadBasis {
  /** λ_j = s_j² of the centred weights, largest first (only those above the rank tolerance). */
  values: Float64Array;
  /** The first `count` (≤ ρ) seed rows u_j of length R, row-major, unit length, orthonormal and orthogonal to the all-ones vector; made on first use. */
  seeds(count: number): Float32Array;
  rank: number;
  classes: number;
}

/**
 * Eigenvalues below this fraction of the largest count as zero: far above float64 round-off of
 * the Gram matrix (~1e-16 relative) and below anything that moves a float32 map (our choice).
 */
const RANK_TOLERANCE = 1e-10;

/** The head z = W·f + b when the scores come straight from one, else undefined. */
export function findLinearHead(pm: PreparedModel): LinearHead | undefined {
  const a = pm.analysis;
  const R = pm.scores.numClasses;
  let node = a.graph.producer.get(pm.scores.tensor);
  if (!node) return undefined;
  if (node.opType === 'Add') {
    // MatMul + Add(bias): the bias must not depend on the image.
    const [x, y] = node.inputs;
    const mm = [x, y].map((t) => a.graph.producer.get(t)).find((p) => p?.opType === 'MatMul');
    const other = mm && (mm.outputs[0] === x ? y : x);
    if (!mm || a.differentiable(other!)) return undefined;
    node = mm;
  }
  const [f, w] = node.inputs;
  if (!a.differentiable(f) || a.differentiable(w)) return undefined;
  const fs = a.shape(f);
  if (fs.length !== 2 || fs[0] !== 1) return undefined;
  const D = fs[1];
  const values = a.value(w);
  if (!values || values.length !== R * D) return undefined;
  const weight = new Float64Array(R * D);
  if (node.opType === 'Gemm') {
    if (attrInt(node, 'transA', 0) !== 0) return undefined;
    const alpha = attrFloat(node, 'alpha', 1);
    const transB = attrInt(node, 'transB', 0) === 1; // B is [R,D] when transposed, else [D,R]
    for (let r = 0; r < R; r++) for (let d = 0; d < D; d++) weight[r * D + d] = alpha * values[transB ? r * D + d : d * R + r];
  } else if (node.opType === 'MatMul') {
    if (a.shape(w).length !== 2) return undefined;
    for (let r = 0; r < R; r++) for (let d = 0; d < D; d++) weight[r * D + d] = values[d * R + r];
  } else return undefined;
  return { weight, classes: R, features: D, node: node.name };
}

const cache = new Map<string, HeadBasis | null>();

/** The spectral basis of the model's head, computed once per model (sha256) and scores tensor. */
export function headBasis(pm: PreparedModel): HeadBasis | undefined {
  const key = `${pm.model.sha256}|${pm.scores.tensor}`;
  if (!cache.has(key)) {
    const head = findLinearHead(pm);
    // Non-finite weights (a damaged model; found by test/fuzz) have no spectral basis: one-hot seeds then.
    cache.set(key, head && head.weight.every((v) => Number.isFinite(v)) ? spectralBasis(head) : null);
    if (cache.size > 16) cache.delete(cache.keys().next().value as string);
  }
  return cache.get(key) ?? undefined;
}

/**
 * Left singular vectors of the class-centred weights, from the smaller Gram matrix (float64).
 * Every eigenvalue is computed at once; the seed rows only when asked for (a probe needs its K,
 * an exact sweep all ρ), since the vectors cost most.
 */
export function spectralBasis(head: LinearHead): HeadBasis {
  const { classes: R, features: D, weight } = head;
  const M = new Float64Array(R * D);
  for (let d = 0; d < D; d++) {
    let mean = 0;
    for (let r = 0; r < R; r++) mean += weight[r * D + d];
    mean /= R;
    for (let r = 0; r < R; r++) M[r * D + d] = weight[r * D + d] - mean;
  }
  const byClass = R <= D; // eigenvectors of M·Mᵀ are the u_j themselves; else u_j = M·v_j/s_j
  const n = byClass ? R : D;
  const gram = gramOfRows(byClass ? M : transpose(M, R, D), n, byClass ? D : R);
  const eigen = new SymmetricEigen(gram, n);
  const top = Math.max(eigen.values[0] ?? 0, 0);
  let rank = 0;
  while (rank < n && eigen.values[rank] > top * RANK_TOLERANCE && eigen.values[rank] > 0) rank++;
  const values = eigen.values.slice(0, rank);
  const rows: Float32Array[] = [];
  const seedRow = (j: number): Float32Array => {
    const vec = eigen.vector(j);
    const u = new Float64Array(R);
    if (byClass) u.set(vec);
    else {
      const s = Math.sqrt(values[j]);
      for (let r = 0; r < R; r++) {
        let acc = 0;
        for (let d = 0; d < D; d++) acc += M[r * D + d] * vec[d];
        u[r] = acc / s;
      }
    }
    // Remove the round-off component along the all-ones vector, then renormalise.
    let mean = 0;
    for (let r = 0; r < R; r++) mean += u[r];
    mean /= R;
    let norm = 0;
    for (let r = 0; r < R; r++) { u[r] -= mean; norm += u[r] * u[r]; }
    norm = Math.sqrt(norm);
    return Float32Array.from(u, (x) => x / norm);
  };
  return {
    values, rank, classes: R,
    seeds(count: number): Float32Array {
      const k = Math.min(Math.max(count, 0), rank);
      while (rows.length < k) rows.push(seedRow(rows.length));
      const out = new Float32Array(k * R);
      for (let j = 0; j < k; j++) out.set(rows[j], j * R);
      return out;
    },
  };
}

function transpose(x: Float64Array, rows: number, cols: number): Float64Array {
  const t = new Float64Array(rows * cols);
  for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) t[c * rows + r] = x[r * cols + c];
  return t;
}

/**
 * G = X·Xᵀ for X with n rows of length L (row-major), in 4×4 tiles of rows so each pass over
 * memory feeds 16 dot products: the one-row-at-a-time loop streamed all of X per row and took
 * seconds on a 1000×2048 head.
 */
export function gramOfRows(x: Float64Array, n: number, L: number): Float64Array {
  const g = new Float64Array(n * n);
  const B = 4;
  for (let i0 = 0; i0 < n; i0 += B) {
    for (let j0 = i0; j0 < n; j0 += B) {
      if (i0 + B <= n && j0 + B <= n) {
        const a0 = i0 * L, a1 = a0 + L, a2 = a1 + L, a3 = a2 + L;
        const b0 = j0 * L, b1 = b0 + L, b2 = b1 + L, b3 = b2 + L;
        let s00 = 0, s01 = 0, s02 = 0, s03 = 0, s10 = 0, s11 = 0, s12 = 0, s13 = 0;
        let s20 = 0, s21 = 0, s22 = 0, s23 = 0, s30 = 0, s31 = 0, s32 = 0, s33 = 0;
        for (let d = 0; d < L; d++) {
          const x0 = x[a0 + d], x1 = x[a1 + d], x2 = x[a2 + d], x3 = x[a3 + d];
          const y0 = x[b0 + d], y1 = x[b1 + d], y2 = x[b2 + d], y3 = x[b3 + d];
          s00 += x0 * y0; s01 += x0 * y1; s02 += x0 * y2; s03 += x0 * y3;
          s10 += x1 * y0; s11 += x1 * y1; s12 += x1 * y2; s13 += x1 * y3;
          s20 += x2 * y0; s21 += x2 * y1; s22 += x2 * y2; s23 += x2 * y3;
          s30 += x3 * y0; s31 += x3 * y1; s32 += x3 * y2; s33 += x3 * y3;
        }
        const tile = [s00, s01, s02, s03, s10, s11, s12, s13, s20, s21, s22, s23, s30, s31, s32, s33];
        for (let a = 0; a < B; a++) for (let b = 0; b < B; b++) g[(i0 + a) * n + j0 + b] = g[(j0 + b) * n + i0 + a] = tile[a * B + b];
      } else {
        for (let i = i0; i < Math.min(i0 + B, n); i++) for (let j = j0; j < Math.min(j0 + B, n); j++) {
          let s = 0;
          for (let d = 0; d < L; d++) s += x[i * L + d] * x[j * L + d];
          g[i * n + j] = g[j * n + i] = s;
        }
      }
    }
  }
  return g;
}
