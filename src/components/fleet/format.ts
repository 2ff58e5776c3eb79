/** Display precision (DESIGN.md): lengths mm with 3 decimals, angles deg with 4. Files keep full precision. */
export const fmt = (v: number | null | undefined, unit: 'mm' | 'deg' | string, signed = false) => {
  if (v === null || v === undefined || !Number.isFinite(v)) return '—';
  const s = v.toFixed(unit === 'deg' ? 4 : 3);
  return signed && v >= 0 ? `+${s}` : s;
};

/** σ-scores with two decimals. */
export const fmtSigma = (z: number | null | undefined) => (z === null || z === undefined ? '—' : (z >= 0 ? '+' : '') + z.toFixed(2));

/**
 * Diverging background for a σ-score, built on the palette: below the fleet mean toward the accent (teal),
 * above it toward attention (amber); full strength at 3σ. The number is always printed in the cell too.
 */
export function sigmaBackground(z: number | null | undefined): string | undefined {
  if (z === null || z === undefined) return undefined;
  const k = Math.min(Math.abs(z) / 3, 1);
  const pct = Math.round(10 + 55 * k);
  const colour = z < 0 ? 'var(--color-accent)' : 'var(--color-attention)';
  return `color-mix(in srgb, ${colour} ${pct}%, white)`;
}

export { downloadCsv } from '../csv-download';
