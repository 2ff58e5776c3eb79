/**
 * `offsetry pull`: download a file of a unit's current approved parameter set. Nothing is written unless the
 * whole file arrived and its SHA-256 matches the server's x-content-sha256; a unit without an approved set
 * exits with EXIT_NOTHING.
 */
import { existsSync, statSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import { CliError, EXIT_OK, EXIT_USAGE, parseOptions, required, type Io } from './common';
import { EXIT_NOTHING, REMOTE_OPTIONS, getJson, refusalError, refusalOf, remoteFrom, send, sha256Hex, writeFileAtomically } from './remote';
import { PULL_USAGE } from './usage';

export const PULL_FORMATS = ['json', 'csv', 'urdf', 'certificate'] as const;
type PullFormat = (typeof PULL_FORMATS)[number];

/** Where each format comes from: the export route, or the parameter-set certificate route. */
export function pullPath(setId: string, format: PullFormat) {
  const id = encodeURIComponent(setId);
  return format === 'certificate' ? `/api/parameter-sets/${id}/certificate` : `/api/parameter-sets/${id}/export?format=${format}`;
}

interface UnitReply {
  serial: string;
  currentParameterSet: { id: string; version: number; approvedAt: string } | null;
}

export async function runPull(args: string[], io: Io): Promise<number> {
  const v = parseOptions(args, { ...REMOTE_OPTIONS, unit: { type: 'string' }, format: { type: 'string' }, out: { type: 'string' } }, PULL_USAGE);
  const serial = required(v.unit, '--unit', PULL_USAGE);
  const out = required(v.out, '--out', PULL_USAGE);
  const format = (v.format ?? 'json') as PullFormat;
  if (!PULL_FORMATS.includes(format)) throw new CliError(`--format "${String(v.format)}" is not known (expected ${PULL_FORMATS.join(', ')})`, EXIT_USAGE);
  const full = resolve(out);
  if (!existsSync(dirname(full)) || !statSync(dirname(full)).isDirectory()) throw new CliError(`--out ${out}: the folder ${dirname(out)} does not exist`);
  if (existsSync(full) && statSync(full).isDirectory()) throw new CliError(`--out ${out}: is a folder, expected a file name`);
  const remote = remoteFrom(v, PULL_USAGE);

  const unit = await getJson<UnitReply>(remote, `/api/units/${encodeURIComponent(serial)}`, `unit ${serial}`);
  const set = unit.currentParameterSet;
  if (!set) throw new CliError(`unit ${serial} has no approved parameter set; nothing written`, EXIT_NOTHING);

  const res = await send(remote, pullPath(set.id, format), { headers: { accept: '*/*' } });
  if (!res.ok) throw refusalError(await refusalOf(res), `${format} of unit ${serial} v${set.version}`);
  const bytes = new Uint8Array(await res.arrayBuffer());
  const declared = res.headers.get('x-content-sha256');
  const actual = sha256Hex(bytes);
  if (declared && declared !== actual) throw new CliError(`the download of unit ${serial} v${set.version} is damaged (SHA-256 ${actual}, the server says ${declared}); nothing written`);
  await writeFileAtomically(full, bytes);
  io.out(`wrote ${out}: unit ${serial}, parameter set v${set.version} (approved ${set.approvedAt}), ${format}, ${bytes.length} bytes, sha256 ${actual}`);
  // DESIGN.md's safety wording, wherever a set is exported.
  io.err("Caution: a parameter set changes where the arm goes. Before production use, load it with safeguards active, run test motions at reduced speed, confirm positions against known references, and keep the previous set ready to restore. Follow your site's safety procedures, the applicable machinery-safety regulations and the instructions of qualified personnel.");
  return EXIT_OK;
}
