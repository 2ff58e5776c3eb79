import { stampSeconds } from '../../lib/shared/fit-label';

/** Display helpers of the fit pages (DESIGN.md precision: mm 3 decimals, deg 4 decimals; files keep full precision). */
export const mm = (v: number | null | undefined) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : v.toFixed(3));
export const deg = (v: number | null | undefined) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : v.toFixed(4));
export const byUnit = (unit: 'mm' | 'deg', v: number | null | undefined) => (unit === 'mm' ? mm(v) : deg(v));
export const sci = (v: number | null | undefined) =>
  v === null || v === undefined || !Number.isFinite(v) ? '—' : Math.abs(v) >= 1e4 || (Math.abs(v) < 1e-3 && v !== 0) ? v.toExponential(3) : v.toPrecision(4);
/** Times on the fit pages to the second, so fits started in the same minute read apart. */
export const when = (iso: string | null | undefined) => stampSeconds(iso);

export const FIT_STATE_LABEL: Record<string, string> = { queued: '◌ queued', running: '◌ running', fitted: '✓ fitted', failed: '✕ failed' };
export const REVIEW_STATE_LABEL: Record<string, string> = { awaiting_review: '◌ awaiting review', approved: '✓ approved', returned: '✕ returned' };

export const GROUP_LABEL: Record<string, string> = {
  lengths: 'Lengths (a, d)',
  twists: 'Twists (alpha)',
  offsets: 'Zero offsets (theta)',
  beta: 'Twists about y (beta)',
  base: 'Base frame',
  tool: 'Tool point',
};
export const GROUP_ORDER = ['lengths', 'twists', 'offsets', 'beta', 'base', 'tool'];

export { downloadCsv } from '../csv-download';
