/**
 * Small dense linear algebra on flat row-major Float64Arrays (p×p, p up to a few dozen): the Cholesky
 * factorisation and solves of the normal equations, inverses through it, the symmetric eigenvalue solver
 * of the observability indices and the IK's singular values, and a few matrix helpers.
 *
 * Flat loops instead of ml-matrix objects because these run inside the solver's iterations and per pose,
 * where object-based matrices cost more than the arithmetic (the Cholesky is checked against ml-matrix's
 * CholeskyDecomposition in tests/engine/lm.test.ts, the eigenvalues against its EigenvalueDecomposition in
 * tests/engine/identifiability.test.ts). ml-matrix stays where one decomposition is called once (the SVD
 * of the Kabsch registration).
 */

/**
 * Cholesky factorisation in place: the lower triangle of the p×p row-major M becomes L with M = LLᵀ
 * (the upper triangle is not read). Returns false when M is not positive definite.
 */
export function choleskyInPlace(M: Float64Array, p: number): boolean {
  for (let j = 0; j < p; j++) {
    const rj = j * p;
    let d = M[rj + j];
    for (let k = 0; k < j; k++) d -= M[rj + k] * M[rj + k];
    if (!(d > 0)) return false;
    const ljj = Math.sqrt(d);
    M[rj + j] = ljj;
    for (let i = j + 1; i < p; i++) {
      const ri = i * p;
      let s = M[ri + j];
      for (let k = 0; k < j; k++) s -= M[ri + k] * M[rj + k];
      M[ri + j] = s / ljj;
    }
  }
  return true;
}

/**
 * Cholesky factor of A into the lower triangle of L (A is not changed; L's upper triangle is left as it
 * is). Returns false when A is not positive definite.
 */
export function choleskyInto(A: Float64Array, p: number, L: Float64Array): boolean {
  for (let i = 0; i < p; i++) for (let j = 0; j <= i; j++) L[i * p + j] = A[i * p + j];
  return choleskyInPlace(L, p);
}

/** Solve LLᵀx = b in place (b becomes x) with the factor from choleskyInPlace. */
export function choleskySolveInPlace(L: Float64Array, p: number, b: Float64Array): void {
  for (let i = 0; i < p; i++) {
    let s = b[i];
    for (let k = 0; k < i; k++) s -= L[i * p + k] * b[k];
    b[i] = s / L[i * p + i];
  }
  for (let i = p - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < p; k++) s -= L[k * p + i] * b[k];
    b[i] = s / L[i * p + i];
  }
}

/** Cholesky factor of the unit-diagonal scaled matrix S = D⁻¹AD⁻¹ with the scales D = diag(d). */
export interface ScaledCholesky {
  /** Lower triangle: S = LLᵀ. */
  L: Float64Array;
  /** d_j = √|A_jj| (1 where that is 0 or not a number). */
  d: Float64Array;
}

/**
 * Cholesky factor of a symmetric p×p A after scaling it to unit diagonal (for accuracy when the columns
 * mix mm and rad); only the lower triangle of A is read. Returns null when A is not positive definite.
 */
export function scaledCholesky(A: Float64Array, p: number): ScaledCholesky | null {
  const d = new Float64Array(p);
  for (let j = 0; j < p; j++) d[j] = Math.sqrt(Math.abs(A[j * p + j])) || 1;
  const L = new Float64Array(p * p);
  for (let a = 0; a < p; a++) for (let b = 0; b <= a; b++) L[a * p + b] = A[a * p + b] / (d[a] * d[b]);
  return choleskyInPlace(L, p) ? { L, d } : null;
}

/** factor·A⁻¹ from A's scaled Cholesky factor, column by column (the one place an inverse is the result). */
export function scaledInverse(f: ScaledCholesky, p: number, factor = 1): Float64Array {
  const { L, d } = f;
  const inv = new Float64Array(p * p);
  const col = new Float64Array(p);
  for (let b = 0; b < p; b++) {
    col.fill(0);
    col[b] = 1;
    choleskySolveInPlace(L, p, col);
    for (let a = 0; a < p; a++) inv[a * p + b] = (factor * col[a]) / (d[a] * d[b]);
  }
  return inv;
}

/**
 * A·B of two p×p row-major matrices, or A·Bᵀ with `b` = 'transposed' (B is read by rows then: no
 * transposed copy).
 */
export function multiplySquare(A: Float64Array, B: Float64Array, p: number, b: 'as-is' | 'transposed' = 'as-is'): Float64Array {
  // B's entry (k, c) is at k·sk + c·sc.
  const sk = b === 'transposed' ? 1 : p, sc = b === 'transposed' ? p : 1;
  const out = new Float64Array(p * p);
  for (let r = 0; r < p; r++) for (let c = 0; c < p; c++) {
    let s = 0;
    for (let k = 0; k < p; k++) s += A[r * p + k] * B[k * sk + c * sc];
    out[r * p + c] = s;
  }
  return out;
}

/** Mirror the upper triangle of a p×p row-major matrix into the lower one. */
export function symmetrize(A: Float64Array, p: number): void {
  for (let a = 0; a < p; a++) for (let b = a + 1; b < p; b++) A[b * p + a] = A[a * p + b];
}

/** Sub-matrix of A (p×p row-major) on the index list `idx`. */
export function subMatrix(A: Float64Array, p: number, idx: number[]): Float64Array {
  const k = idx.length;
  const out = new Float64Array(k * k);
  for (let a = 0; a < k; a++) for (let b = 0; b < k; b++) out[a * k + b] = A[idx[a] * p + idx[b]];
  return out;
}

/**
 * Eigenvalues of a symmetric p×p row-major matrix by the cyclic Jacobi method (Golub & Van Loan,
 * "Matrix Computations", §8.5), into `out` (unsorted); `a` is overwritten. Rotations zero each
 * off-diagonal entry in turn until the off-diagonal mass is below 1e-30 of the diagonal's. Allocates
 * nothing (the IK calls it per target).
 */
export function symmetricEigenvaluesInPlace(a: Float64Array, p: number, out: Float64Array): void {
  for (let sweep = 0; sweep < 60; sweep++) {
    let off = 0, diag = 0;
    for (let i = 0; i < p; i++) {
      diag += a[i * p + i] * a[i * p + i];
      for (let j = i + 1; j < p; j++) off += a[i * p + j] * a[i * p + j];
    }
    if (off <= 1e-30 * diag || off === 0) break;
    for (let i = 0; i < p - 1; i++) {
      for (let j = i + 1; j < p; j++) {
        const aij = a[i * p + j];
        if (aij === 0) continue;
        const theta = (a[j * p + j] - a[i * p + i]) / (2 * aij);
        const t = (theta >= 0 ? 1 : -1) / (Math.abs(theta) + Math.sqrt(theta * theta + 1));
        const c = 1 / Math.sqrt(t * t + 1), s = t * c;
        // A ← Jᵀ A J: columns i, j then rows i, j. Outside the 2×2 block the column and the row updates
        // touch different entries, so they share one loop; the block itself keeps the columns-then-rows order.
        const pi = i * p, pj = j * p;
        for (let k = 0; k < p; k++) {
          if (k === i || k === j) continue;
          const pk = k * p;
          const aki = a[pk + i], akj = a[pk + j];
          a[pk + i] = c * aki - s * akj;
          a[pk + j] = s * aki + c * akj;
          const aik = a[pi + k], ajk = a[pj + k];
          a[pi + k] = c * aik - s * ajk;
          a[pj + k] = s * aik + c * ajk;
        }
        const aii = a[pi + i], aij2 = a[pi + j], aji = a[pj + i], ajj = a[pj + j];
        const cii = c * aii - s * aij2, cij = s * aii + c * aij2;
        const cji = c * aji - s * ajj, cjj = s * aji + c * ajj;
        a[pi + i] = c * cii - s * cji;
        a[pj + i] = s * cii + c * cji;
        a[pi + j] = c * cij - s * cjj;
        a[pj + j] = s * cij + c * cjj;
      }
    }
  }
  for (let i = 0; i < p; i++) out[i] = a[i * p + i];
}

/** Eigenvalues of a symmetric p×p row-major matrix (cyclic Jacobi, see symmetricEigenvaluesInPlace); S is kept. Unsorted. */
export function symmetricEigenvalues(S: Float64Array, p: number): Float64Array {
  const out = new Float64Array(p);
  symmetricEigenvaluesInPlace(Float64Array.from(S), p, out);
  return out;
}
