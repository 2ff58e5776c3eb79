import type { ParameterReport } from '../../lib/engine/fit';
import { byUnit, downloadCsv, GROUP_LABEL, GROUP_ORDER } from './format';

/** Every candidate parameter by group: nominal, calibrated, change, standard error and whether it was identified. */
export default function ParameterTable({ parameters, fileBase }: { parameters: ParameterReport[]; fileBase: string }) {
  const ordered = GROUP_ORDER.flatMap((g) => parameters.filter((p) => p.group === g));
  return (
    <section className="card mb-6">
      <h2 className="mb-2">Parameters</h2>
      <div className="overflow-x-auto">
        <table className="data-table" data-parameter-table>
          <thead>
            <tr><th>Parameter</th><th>Unit</th><th className="num">Nominal</th><th className="num">Calibrated</th><th className="num">Change</th><th className="num">Standard error</th><th>Status</th></tr>
          </thead>
          <tbody>
            {GROUP_ORDER.map((g) => {
              const rows = ordered.filter((p) => p.group === g);
              if (!rows.length) return null;
              return [
                <tr key={g}><th colSpan={7} className="bg-paper">{GROUP_LABEL[g]}</th></tr>,
                ...rows.map((p) => (
                  <tr key={p.key} data-parameter={p.key}>
                    <td>{p.joint ? `${p.joint} ${p.name}` : p.key}</td>
                    <td>{p.unit}</td>
                    <td className="num">{byUnit(p.unit, p.nominal)}</td>
                    <td className="num">{byUnit(p.unit, p.calibrated)}</td>
                    <td className="num">{byUnit(p.unit, p.change)}</td>
                    <td className="num">{byUnit(p.unit, p.standardError)}</td>
                    <td>{p.status === 'identified' ? <span className="text-accent">● identified</span> : <span className="text-ink-soft">◌ fixed at nominal — {p.reason}</span>}</td>
                  </tr>
                )),
              ];
            })}
          </tbody>
        </table>
      </div>
      <div className="mt-2">
        <button type="button" className="btn btn-quiet" onClick={() => downloadCsv(`${fileBase}-parameters.csv`, ['key', 'group', 'unit', 'nominal', 'calibrated', 'change', 'standard_error', 'status', 'reason'], ordered.map((p) => [p.key, p.group, p.unit, p.nominal, p.calibrated, p.change, p.standardError, p.status, p.reason ?? '']))}>
          Download CSV
        </button>
      </div>
    </section>
  );
}
