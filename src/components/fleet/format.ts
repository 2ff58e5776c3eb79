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

/** A CSV download of rows (the numbers behind a chart, one click away). */
export function downloadCsv(fileName: string, header: string[], rows: (string | number | null | undefined)[][]) {
  const cell = (v: string | number | null | undefined) => {
    const s = v === null || v === undefined ? '' : String(v);
    return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
  };
  const text = [header, ...rows].map((r) => r.map(cell).join(',')).join('\r\n') + '\r\n';
  const url = URL.createObjectURL(new Blob([text], { type: 'text/csv' }));
  const a = document.createElement('a');
  a.href = url;
  a.download = fileName;
  document.body.appendChild(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 1000);
}
