/**
 * Error statistics of 3-D position errors |measured − predicted| (mm).
 * rms = sqrt(mean e²); mean = mean e; max; p95 = 95th percentile by linear interpolation between order
 * statistics at rank h = (n − 1)·0.95 (Hyndman & Fan 1996 definition 7, the default of R and NumPy).
 * An empty list gives n = 0 and zeros.
 */
import type { ErrorStats } from './types';

export function percentile(sorted: ArrayLike<number>, fraction: number): number {
  const n = sorted.length;
  if (n === 0) return 0;
  const h = (n - 1) * fraction;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, n - 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

export function errorStats(errors: ArrayLike<number>): ErrorStats {
  const n = errors.length;
  if (n === 0) return { n: 0, rms: 0, mean: 0, max: 0, p95: 0 };
  let s = 0, s2 = 0, max = 0, finite = true;
  for (let i = 0; i < n; i++) {
    const e = errors[i];
    s += e;
    s2 += e * e;
    if (e > max) max = e;
    if (!Number.isFinite(e)) finite = false;
  }
  const base = { n, rms: Math.sqrt(s2 / n), mean: s / n, max };
  if (!finite) return { ...base, p95: percentile(Float64Array.from(errors).sort(), 0.95) };
  return { ...base, p95: selectedPercentile(Float64Array.from(errors), 0.95) };
}

/**
 * percentile(sorted copy, fraction) without sorting: the two order statistics it interpolates between,
 * by Hoare's selection (expected O(n)); `a` (finite numbers) is reordered in place.
 */
function selectedPercentile(a: Float64Array, fraction: number): number {
  const n = a.length;
  const h = (n - 1) * fraction;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, n - 1);
  const x = select(a, lo);
  // After selection every entry right of lo is ≥ a[lo]; the next order statistic is their minimum.
  let y = x;
  if (hi > lo) {
    y = Infinity;
    for (let i = lo + 1; i < n; i++) if (a[i] < y) y = a[i];
  }
  return x + (h - lo) * (y - x);
}

/** The k-th smallest entry of a (0-based), leaving a[0..k−1] ≤ a[k] ≤ a[k+1..]. */
function select(a: Float64Array, k: number): number {
  let left = 0, right = a.length - 1;
  while (right > left) {
    // Median of three as pivot.
    const mid = (left + right) >>> 1;
    let x = a[left], y = a[mid], z = a[right];
    if (x > y) [x, y] = [y, x];
    if (y > z) [y, z] = [z, y];
    if (x > y) [x, y] = [y, x];
    const pivot = y;
    let i = left, j = right;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const t = a[i]; a[i] = a[j]; a[j] = t;
        i++; j--;
      }
    }
    if (k <= j) right = j;
    else if (k >= i) left = i;
    else return a[k];
  }
  return a[k];
}
