/**
 * The one decimation of Offsetry: which items of a long series a chart, a 3-D view or a summary draws.
 * Pure and safe for islands and server alike. Large sessions (continuous tracker capture gives 100 000
 * poses) must not send every pose to a page, but what is left out must never hide a problem, so:
 *
 * 1. every item marked `keep` (excluded poses, flagged outliers) stays, up to the budget;
 * 2. half of what is left goes to the largest `score` values (the largest residuals: the extremes);
 * 3. the rest is an even sample over the series (its shape), first item included;
 *
 * and the chosen indices come back in their original order. At or below the limit every index is kept.
 */
export interface DecimateOptions {
  /** Items that must stay (they take the budget first). */
  keep?: (i: number) => boolean;
  /** Larger = more important to keep (e.g. the residual's size); NaN counts as 0. */
  score?: (i: number) => number;
}

export function decimateIndices(n: number, limit: number, options: DecimateOptions = {}): number[] {
  const cap = Math.max(0, Math.floor(limit));
  if (n <= cap) return Array.from({ length: n }, (_, i) => i);
  const chosen = new Uint8Array(n);
  let left = cap;
  if (options.keep) {
    for (let i = 0; i < n && left > 0; i++) {
      if (options.keep(i)) {
        chosen[i] = 1;
        left--;
      }
    }
  }
  if (options.score && left > 0) {
    const top = Math.floor(left / 2);
    if (top > 0) {
      const idx: number[] = [];
      const val = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        if (chosen[i]) continue;
        const s = options.score(i);
        val[i] = Number.isFinite(s) ? s : 0;
        idx.push(i);
      }
      idx.sort((a, b) => val[b]! - val[a]! || a - b);
      for (let k = 0; k < top && k < idx.length; k++) chosen[idx[k]!] = 1;
      left -= Math.min(top, idx.length);
    }
  }
  if (left > 0) {
    const rest: number[] = [];
    for (let i = 0; i < n; i++) if (!chosen[i]) rest.push(i);
    const step = rest.length / left;
    for (let k = 0; k < left && k < rest.length; k++) chosen[rest[Math.floor(k * step)]!] = 1;
  }
  const out: number[] = [];
  for (let i = 0; i < n; i++) if (chosen[i]) out.push(i);
  return out;
}

/** The items at `decimateIndices`, in their original order. */
export function decimate<T>(items: readonly T[], limit: number, options: { keep?: (item: T) => boolean; score?: (item: T) => number } = {}): T[] {
  const idx = decimateIndices(items.length, limit, {
    keep: options.keep ? (i) => options.keep!(items[i]!) : undefined,
    score: options.score ? (i) => options.score!(items[i]!) : undefined,
  });
  return idx.map((i) => items[i]!);
}
