import type { FitReportSummary } from '../../lib/shared/fit-summary';
import { mm, sci } from './format';

/** How well the poses observe the parameters: rank, condition number, observability indices, σ and the solver's run. */
export default function ObservabilityTable({ report }: { report: FitReportSummary }) {
  const o = report.observability;
  return (
    <section className="card min-w-0">
      <h2 className="mb-2">Observability</h2>
      <table className="data-table" data-observability>
        <tbody>
          <tr><td>Identified parameters</td><td className="num">{o.rank} of {o.parameterCount} candidates</td></tr>
          <tr><td>Condition number of the scaled Jacobian</td><td className="num">{sci(o.conditionNumber)}</td></tr>
          <tr><td>O1 (Borm &amp; Menq; larger is better)</td><td className="num">{sci(o.O1)}</td></tr>
          <tr><td>O3 (smallest singular value; larger is better)</td><td className="num">{sci(o.O3)}</td></tr>
          <tr><td>O4 (noise amplification, Nahvi &amp; Hollerbach; larger is better)</td><td className="num">{sci(o.O4)}</td></tr>
          <tr><td>Residual standard deviation σ (mm)</td><td className="num">{mm(report.residualSigmaMm)}</td></tr>
          <tr><td>Solver</td><td className="num whitespace-normal break-words" data-solver>{report.iterations.length} iterations, {report.converged ? 'converged' : 'not converged'} ({report.stopReason})</td></tr>
        </tbody>
      </table>
    </section>
  );
}
