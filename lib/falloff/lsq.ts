// Small least-squares helpers over ml-matrix: symmetric solves of normal equations, robust scale,
// and the 1-D conversion of a log-domain radial curve into the stored polynomial form.

import { CholeskyDecomposition, EigenvalueDecomposition, Matrix, SingularValueDecomposition } from 'ml-matrix';
import { radialPolynomial } from './basis.js';

/** Dense symmetric n x n matrix (row-major Float64Array) to an ml-matrix Matrix, made exactly
 *  symmetric (rounding in the accumulation can leave the two triangles a few ulps apart). */
export function toMatrix(N: Float64Array, n: number): Matrix {
  const M = new Matrix(n, n);
  for (let i = 0; i < n; i++) {
    M.set(i, i, N[i * n + i]);
    for (let j = 0; j < i; j++) {
      const v = 0.5 * (N[i * n + j] + N[j * n + i]);
      M.set(i, j, v);
      M.set(j, i, v);
    }
  }
  return M;
}

/**
 * Solves N x = b for a symmetric positive (semi-)definite N: Cholesky, falling back to the SVD
 * (minimum-norm solution) when N is not positive definite.
 */
export function solveSymmetric(N: Float64Array, b: Float64Array, n: number): Float64Array {
  const M = toMatrix(N, n);
  const B = Matrix.columnVector(Array.from(b));
  let X: Matrix;
  const chol = new CholeskyDecomposition(M);
  if (chol.isPositiveDefinite()) X = chol.solve(B);
  else X = new SingularValueDecomposition(M).solve(B);
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = X.get(i, 0);
  return out;
}

/**
 * Selected columns of the inverse of a symmetric positive definite matrix (Cholesky solves against
 * unit vectors; SVD pseudo-inverse when N is not positive definite). Returns cols.length columns.
 */
export function inverseColumns(N: Float64Array, n: number, cols: readonly number[]): Matrix {
  const M = toMatrix(N, n);
  const E = Matrix.zeros(n, cols.length);
  cols.forEach((c, j) => E.set(c, j, 1));
  const chol = new CholeskyDecomposition(M);
  if (chol.isPositiveDefinite()) return chol.solve(E);
  return new SingularValueDecomposition(M).inverse().mmul(E);
}

/** Inverse of a symmetric positive definite matrix (SVD pseudo-inverse when it is not). */
export function inverseSymmetric(N: Float64Array, n: number): Matrix {
  const M = toMatrix(N, n);
  const chol = new CholeskyDecomposition(M);
  if (chol.isPositiveDefinite()) return chol.solve(Matrix.eye(n));
  return new SingularValueDecomposition(M).inverse();
}

/** Eigenvalues of a symmetric matrix, ascending. */
export function symmetricEigenvalues(M: Matrix): number[] {
  const e = new EigenvalueDecomposition(M, { assumeSymmetric: true });
  return [...e.realEigenvalues].sort((a, b) => a - b);
}

/** Median of the first n values (copies). */
export function median(values: ArrayLike<number>, n = values.length): number {
  if (n === 0) return Number.NaN;
  const a = new Float64Array(n);
  for (let i = 0; i < n; i++) a[i] = values[i];
  a.sort();
  const h = n >> 1;
  return n % 2 ? a[h] : 0.5 * (a[h - 1] + a[h]);
}

/** 1.4826 x median absolute value: a robust standard deviation of zero-centred residuals. */
export function robustSigma(residuals: ArrayLike<number>, use: ArrayLike<number>): number {
  const vals: number[] = [];
  for (let i = 0; i < residuals.length; i++) if (use[i]) vals.push(Math.abs(residuals[i]));
  return 1.4826 * median(vals);
}

export interface RadialConversion {
  /** k1..kn of 1 + k1 t + ... + kn t^n */
  k: number[];
  /** largest relative difference between the two forms over 0 <= r <= 1, % */
  maxErrorPct: number;
}

/**
 * Converts a log-domain radial curve exp(g1 t + g2 t^2 + ...) (t = r^2) into the stored form
 * 1 + k1 t + ... + kn t^n by least squares on 0 <= r <= 1.
 */
export function logRadialToPolynomial(g: readonly number[], terms: number): RadialConversion {
  return logCurveToPolynomial((t) => {
    let G = 0;
    for (let i = g.length - 1; i >= 0; i--) G = (G + g[i]) * t;
    return G;
  }, terms);
}

/**
 * Converts any log-domain radial curve G(t) (G(0) = 0, t = r^2) into 1 + k1 t + ... + kn t^n, least
 * squares in relative error on 0 <= r <= 1.
 */
export function logCurveToPolynomial(G: (t: number) => number, terms: number): RadialConversion {
  const samples = 401;
  const A = new Matrix(samples, terms);
  const y = new Matrix(samples, 1);
  const target = new Float64Array(samples);
  const ts = new Float64Array(samples);
  for (let s = 0; s < samples; s++) {
    const r = s / (samples - 1);
    const t = r * r;
    ts[s] = t;
    const T = Math.exp(G(t));
    target[s] = T;
    // relative weighting: divide each row by T so the fit minimises the relative error
    let p = t;
    for (let i = 0; i < terms; i++) {
      A.set(s, i, p / T);
      p *= t;
    }
    y.set(s, 0, (T - 1) / T);
  }
  const sol = new SingularValueDecomposition(A, { autoTranspose: true }).solve(y);
  const k: number[] = [];
  for (let i = 0; i < terms; i++) k.push(sol.get(i, 0));
  let maxErr = 0;
  for (let s = 0; s < samples; s++) {
    maxErr = Math.max(maxErr, Math.abs(radialPolynomial(k, ts[s]) / target[s] - 1));
  }
  return { k, maxErrorPct: 100 * maxErr };
}
