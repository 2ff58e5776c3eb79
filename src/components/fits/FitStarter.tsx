import { useEffect, useState } from 'react';
import { api, type ApiError } from '../../lib/shared/api-client';
import { openResult } from '../../lib/shared/focus';
import { ErrorSummary, FieldProblem, fieldProps } from '../FormErrors';
import { GROUP_LABEL, GROUP_ORDER } from './format';

const FIELDS = {
  groups: { id: 'fit-groups', label: 'Parameters to identify' },
  holdout: { id: 'fit-holdout', label: 'Hold-out fraction' },
  outlierThreshold: { id: 'fit-outlier-threshold', label: 'Outlier threshold' },
  kFold: { id: 'fit-kfold', label: 'Cross-validation' },
  exclude: { id: 'fit-exclude', label: 'Exclude poses' },
};

interface Props {
  sessionId: string;
  /** The session has a split column (poses marked fit / validate). */
  hasSplit: boolean;
  poseCount: number;
}

/** "Run a fit" form of a session: settings → POST /api/sessions/{id}/fits → the fit's page. */
export default function FitStarter({ sessionId, hasSplit, poseCount }: Props) {
  const [groups, setGroups] = useState<string[]>([...GROUP_ORDER]);
  const [holdout, setHoldout] = useState(hasSplit ? '0' : '0.2');
  const [useSplitColumn, setUseSplitColumn] = useState(hasSplit);
  const [robust, setRobust] = useState(false);
  const [outlierThreshold, setOutlierThreshold] = useState('3');
  const [kFold, setKFold] = useState('0');
  const [exclude, setExclude] = useState('');
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<ApiError | null>(null);
  // Until the island is hydrated a click would submit the form natively (a GET with the settings in the URL).
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);

  const toggle = (g: string) => setGroups((cur) => (cur.includes(g) ? cur.filter((x) => x !== g) : GROUP_ORDER.filter((x) => x === g || cur.includes(x))));

  async function run(e: React.FormEvent) {
    e.preventDefault();
    setBusy(true);
    setError(null);
    const settings = {
      groups,
      holdout: Number(holdout),
      useSplitColumn,
      robust,
      outlierThreshold: Number(outlierThreshold),
      kFold: Number(kFold),
      exclude: exclude.split(/[\s,;]+/).map((s) => s.trim()).filter(Boolean),
    };
    const res = await api<{ id: string }>(`/api/sessions/${sessionId}/fits`, { method: 'POST', json: settings });
    if (res.error) {
      setError(res.error);
      setBusy(false);
      return;
    }
    openResult(`/fits/${res.data.id}`);
  }

  return (
    <form onSubmit={run} className="grid gap-4" data-fit-starter aria-label="Run a fit" noValidate>
      <ErrorSummary error={error} fields={FIELDS} />
      <fieldset className="grid gap-2" id={FIELDS.groups.id} tabIndex={-1}>
        <legend className="mb-1 font-semibold">Parameters to identify</legend>
        <div className="flex flex-wrap gap-x-5 gap-y-1">
          {GROUP_ORDER.map((g) => (
            <label key={g} className="flex min-h-11 items-center gap-2">
              <input type="checkbox" className="h-5 w-5 accent-accent" checked={groups.includes(g)} onChange={() => toggle(g)} name="groups" value={g} />
              {GROUP_LABEL[g]}
            </label>
          ))}
        </div>
        <p className="text-sm text-ink-soft">Parameters the poses cannot determine are kept at nominal, and the report says why.</p>
        <FieldProblem error={error} field="groups" id={FIELDS.groups.id} />
      </fieldset>
      <div className="grid gap-4 sm:grid-cols-2 lg:grid-cols-4">
        <label className="field">
          <span>Hold-out fraction (0 – 0.5)</span>
          <input className="input" type="number" min={0} max={0.5} step={0.05} value={holdout} onChange={(e) => setHoldout(e.target.value)} name="holdout" {...fieldProps(error, 'holdout', FIELDS.holdout.id)} />
          <FieldProblem error={error} field="holdout" id={FIELDS.holdout.id} />
        </label>
        <label className="field">
          <span>Outlier threshold (standardised, 2 – 10)</span>
          <input className="input" type="number" min={2} max={10} step={0.5} value={outlierThreshold} onChange={(e) => setOutlierThreshold(e.target.value)} name="outlierThreshold" {...fieldProps(error, 'outlierThreshold', FIELDS.outlierThreshold.id)} />
          <FieldProblem error={error} field="outlierThreshold" id={FIELDS.outlierThreshold.id} />
        </label>
        <label className="field">
          <span>Cross-validation</span>
          <select className="input" value={kFold} onChange={(e) => setKFold(e.target.value)} name="kFold" {...fieldProps(error, 'kFold', FIELDS.kFold.id)}>
            <option value="0">off</option>
            {[3, 4, 5, 6, 7, 8, 9, 10].map((k) => (
              <option key={k} value={k}>
                {k}-fold
              </option>
            ))}
          </select>
          <FieldProblem error={error} field="kFold" id={FIELDS.kFold.id} />
        </label>
        <label className="field">
          <span>Exclude poses (labels)</span>
          <input className="input" type="text" value={exclude} onChange={(e) => setExclude(e.target.value)} placeholder="e.g. P007, P012" name="exclude" {...fieldProps(error, 'exclude', FIELDS.exclude.id)} />
          <FieldProblem error={error} field="exclude" id={FIELDS.exclude.id} />
        </label>
      </div>
      <div className="flex flex-wrap gap-x-6 gap-y-1">
        {hasSplit && (
          <label className="flex min-h-11 items-center gap-2">
            <input type="checkbox" className="h-5 w-5 accent-accent" checked={useSplitColumn} onChange={(e) => setUseSplitColumn(e.target.checked)} />
            Hold out the poses the file marks “validate”
          </label>
        )}
        <label className="flex min-h-11 items-center gap-2">
          <input type="checkbox" className="h-5 w-5 accent-accent" checked={robust} onChange={(e) => setRobust(e.target.checked)} />
          Robust loss (down-weights large residuals)
        </label>
      </div>
      <div>
        <button type="submit" className="btn" disabled={!hydrated || busy || groups.length === 0}>
          {busy ? 'Starting…' : `Run the fit on ${poseCount} poses`}
        </button>
      </div>
    </form>
  );
}
