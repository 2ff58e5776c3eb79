/**
 * `offsetry status`: where a unit stands — its current approved version, fits queued or running, fits
 * awaiting review, and open drift alerts. Sections the token's roles may not read are named as such.
 */
import { EXIT_OK, parseOptions, required, type Io } from './common';
import { REMOTE_OPTIONS, getJson, getJsonIfAllowed, remoteFrom } from './remote';
import { STATUS_USAGE } from './usage';

interface UnitReply {
  serial: string;
  site: string;
  cell: string;
  needsAttention: boolean;
  model: { name: string };
  revision: { revision: number };
  currentParameterSet: { id: string; version: number; approvedAt: string } | null;
}
interface FitRow { id: string; state: string; reviewState: string | null; createdAt: string; sessionMeasuredOn: string; rmsAfterMm?: number | null }
interface AlertRow { id: string; serial: string; version: number; createdAt: string; details: { key: string; change: number; tolerance: number; unit: string }[] }

export interface UnitStatus {
  serial: string;
  model: string;
  revision: number;
  site: string;
  cell: string;
  needsAttention: boolean;
  current: UnitReply['currentParameterSet'];
  openFits: FitRow[] | null;
  awaitingReview: FitRow[] | null;
  openAlerts: AlertRow[] | null;
}

export async function runStatus(args: string[], io: Io): Promise<number> {
  const v = parseOptions(args, { ...REMOTE_OPTIONS, unit: { type: 'string' }, json: { type: 'boolean' } }, STATUS_USAGE);
  const serial = required(v.unit, '--unit', STATUS_USAGE);
  const remote = remoteFrom(v, STATUS_USAGE);
  const s = encodeURIComponent(serial);
  const unit = await getJson<UnitReply>(remote, `/api/units/${s}`, `unit ${serial}`);
  const fits = (q: string) => getJsonIfAllowed<{ items: FitRow[] }>(remote, `/api/fits?unit=${s}&${q}&pageSize=200`, `fits of unit ${serial}`).then((r) => r?.items ?? null);
  const [queued, running, review, alerts] = await Promise.all([
    fits('state=queued'),
    fits('state=running'),
    fits('review=awaiting_review'),
    getJsonIfAllowed<{ alerts: AlertRow[] }>(remote, '/api/alerts', 'drift alerts').then((r) => r?.alerts.filter((a) => a.serial === unit.serial) ?? null),
  ]);
  const status: UnitStatus = {
    serial: unit.serial,
    model: unit.model.name,
    revision: unit.revision.revision,
    site: unit.site,
    cell: unit.cell,
    needsAttention: unit.needsAttention,
    current: unit.currentParameterSet,
    openFits: queued && running ? [...running, ...queued] : null,
    awaitingReview: review,
    openAlerts: alerts,
  };
  if (v.json) {
    io.out(JSON.stringify(status, null, 2));
    return EXIT_OK;
  }
  const hidden = 'not visible to this token\'s roles';
  io.out(`unit ${status.serial} · ${status.model} r${status.revision} · ${[status.site, status.cell].filter(Boolean).join(' / ') || 'no site'}${status.needsAttention ? ' · needs attention' : ''}`);
  io.out(`current parameter set: ${status.current ? `v${status.current.version} (approved ${status.current.approvedAt}, id ${status.current.id})` : 'none approved'}`);
  const list = (title: string, rows: FitRow[] | null) => {
    if (rows === null) return io.out(`${title}: ${hidden}`);
    io.out(`${title}: ${rows.length}`);
    for (const f of rows) io.out(`  fit ${f.id}  ${f.state}${f.reviewState ? ` / ${f.reviewState}` : ''}  session of ${f.sessionMeasuredOn}  created ${f.createdAt}`);
  };
  list('open fits (queued or running)', status.openFits);
  list('fits awaiting review', status.awaitingReview);
  if (status.openAlerts === null) io.out(`open drift alerts: ${hidden}`);
  else {
    io.out(`open drift alerts: ${status.openAlerts.length}`);
    for (const a of status.openAlerts) {
      io.out(`  alert ${a.id}  v${a.version}  raised ${a.createdAt}: ${a.details.map((d) => `${d.key} ${d.change.toFixed(d.unit === 'mm' ? 3 : 4)} ${d.unit} (tolerance ${d.tolerance} ${d.unit})`).join(', ')}`);
    }
  }
  return EXIT_OK;
}
