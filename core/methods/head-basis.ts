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
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { attrFloat, attrInt } from '../model/graph';
import { PreparedModel } from '../plan/prepared';

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
  /** ρ seed rows u_j of length R, row-major, unit length and orthogonal to the all-ones vector. */
  seeds: Float32Array;
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
    // Non-finite weights (a damaged model; found by test/fuzz) have no spectral basis: one-hot seeds then.
    cache.set(key, head && head.weight.every((v) => Number.isFinite(v)) ? spectralBasis(head) : null);
    if (cache.size > 16) cache.delete(cache.keys().next().value as string);
  }
  return cache.get(key) ?? undefined;
}

/** Left singular vectors of the class-centred weights, from the smaller Gram matrix (float64). */
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
  const gram = new Float64Array(n * n);
  if (byClass) {
    for (let i = 0; i < R; i++) for (let j = i; j < R; j++) {
      let s = 0;
      for (let d = 0; d < D; d++) s += M[i * D + d] * M[j * D + d];
      gram[i * n + j] = gram[j * n + i] = s;
    }
  } else {
    for (let r = 0; r < R; r++) {
      const row = r * D;
      for (let i = 0; i < D; i++) {
        const mi = M[row + i];
        if (mi === 0) continue;
        for (let j = i; j < D; j++) gram[i * n + j] += mi * M[row + j];
      }
    }
    for (let i = 0; i < D; i++) for (let j = 0; j < i; j++) gram[i * n + j] = gram[j * n + i];
  }
  const rows = Array.from({ length: n }, (_, i) => Array.from(gram.subarray(i * n, (i + 1) * n)));
  const evd = new EigenvalueDecomposition(new Matrix(rows), { assumeSymmetric: true });
  const lambda = evd.realEigenvalues;
  const V = Float64Array.from(evd.eigenvectorMatrix.to1DArray()); // row-major n×n, column j = eigenvector j
  const order = lambda.map((_, i) => i).sort((x, y) => lambda[y] - lambda[x]);
  const top = Math.max(lambda[order[0]] ?? 0, 0);
  const kept = order.filter((i) => lambda[i] > top * RANK_TOLERANCE && lambda[i] > 0);
  const seeds = new Float32Array(kept.length * R);
  kept.forEach((col, j) => {
    const u = new Float64Array(R);
    if (byClass) for (let r = 0; r < R; r++) u[r] = V[r * n + col];
    else {
      const s = Math.sqrt(lambda[col]);
      const v = Float64Array.from({ length: D }, (_, d) => V[d * n + col]);
      for (let r = 0; r < R; r++) {
        let acc = 0;
        for (let d = 0; d < D; d++) acc += M[r * D + d] * v[d];
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
    for (let r = 0; r < R; r++) seeds[j * R + r] = u[r] / norm;
  });
  return { values: Float64Array.from(kept.map((i) => lambda[i])), seeds, rank: kept.length, classes: R };
}
