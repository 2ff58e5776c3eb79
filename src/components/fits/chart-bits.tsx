/**
 * Small pieces the fit charts share: the words for a pose's role, a tooltip that always names the pose, its
 * role and the unit of every value, and a marker shape that sets excluded poses apart (✕, not a dot).
 */
import type { PoseResidual } from '../../lib/engine/fit';

export const ROLE_WORD: Record<string, string> = {
  fit: 'fit pose',
  holdout: 'held-out pose (not fitted, checks the fit)',
  excluded: 'excluded pose (not used by the fit)',
  outlier: 'outlier (fit pose above the threshold)',
};

export const roleOf = (p: Pick<PoseResidual, 'role' | 'outlier'>) => (p.role === 'fit' && p.outlier ? 'outlier' : p.role);

export interface TipRow {
  name: string;
  value: string;
}

/** recharts tooltip content: heading, role and rows, each value with its unit. */
export function PoseTip({ active, heading, role, rows }: { active?: boolean; heading: string; role?: string; rows: TipRow[] }) {
  if (!active) return null;
  return (
    <div className="rounded border border-rule bg-white px-3 py-2 text-sm shadow-sm" data-chart-tooltip>
      <p className="font-semibold">{heading}</p>
      {role && <p className="text-ink-soft">{ROLE_WORD[role] ?? role}</p>}
      {rows.map((r) => (
        <p key={r.name} className="tabular-nums">
          {r.name}: {r.value}
        </p>
      ))}
    </div>
  );
}

/** Scatter marker by role: ✕ for excluded, otherwise the series' own symbol drawn by recharts' default. */
export function crossMarker(cx: number, cy: number, colour: string, size = 5) {
  return <path d={`M${cx - size},${cy - size}L${cx + size},${cy + size}M${cx - size},${cy + size}L${cx + size},${cy - size}`} stroke={colour} strokeWidth={1.6} fill="none" />;
}
