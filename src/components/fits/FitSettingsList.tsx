import { GROUP_LABEL } from './format';

/** A fit's stored settings as a readable list (the API keeps the JSON; this is how a person reads it). */
export default function FitSettingsList({ settings }: { settings: Record<string, unknown> }) {
  const s = settings;
  const known = new Set(['groups', 'holdout', 'useSplitColumn', 'robust', 'outlierThreshold', 'exclude', 'kFold', 'seed']);
  const groups = Array.isArray(s.groups) ? (s.groups as string[]) : null;
  const exclude = Array.isArray(s.exclude) ? (s.exclude as string[]) : [];
  const holdout = typeof s.holdout === 'number' ? s.holdout : 0;
  const rows: [string, string][] = [
    ['Parameter groups identified', groups ? groups.map((g) => GROUP_LABEL[g] ?? g).join(' · ') : 'all'],
    ['Hold-out', holdout > 0 ? `${Math.round(holdout * 100)} % of the pose labels, drawn with seed ${String(s.seed ?? 1)}` : 'none'],
    ['Split column of the file', s.useSplitColumn === false ? 'ignored' : 'used (poses marked validate are held out)'],
    ['Loss', s.robust ? 'robust (Huber), large residuals weigh less' : 'least squares'],
    ['Outlier flag', `standardised residual above ${String(s.outlierThreshold ?? 3)}`],
    ['Cross-validation', typeof s.kFold === 'number' && s.kFold > 0 ? `${s.kFold}-fold` : 'off'],
    ['Excluded poses', exclude.length ? `${exclude.length}: ${exclude.join(', ')}` : 'none'],
    ...Object.entries(s)
      .filter(([k]) => !known.has(k))
      .map(([k, v]) => [k, typeof v === 'string' ? v : JSON.stringify(v)] as [string, string]),
  ];
  return (
    <dl className="grid grid-cols-1 gap-x-4 gap-y-0.5 sm:grid-cols-[max-content_minmax(0,1fr)]" data-fit-settings>
      {rows.map(([k, v]) => (
        <div key={k} className="contents">
          <dt className="text-ink-soft">{k}</dt>
          <dd className="break-words">{v}</dd>
        </div>
      ))}
    </dl>
  );
}
