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
  let s = 0, s2 = 0, max = 0;
  for (let i = 0; i < n; i++) {
    const e = errors[i];
    s += e;
    s2 += e * e;
    if (e > max) max = e;
  }
  const sorted = Float64Array.from(errors).sort();
  return { n, rms: Math.sqrt(s2 / n), mean: s / n, max, p95: percentile(sorted, 0.95) };
}
