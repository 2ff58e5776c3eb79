/** `offsetry check`: error statistics of a geometry against a session, without fitting. */
import { checkGeometry } from '../lib/engine/fit';
import { iso9283, repeatGroups } from '../lib/engine/iso9283';
import { forwardPoint } from '../lib/engine/kinematics';
import { EngineInputError } from '../lib/engine/types';
import { CliError, EXIT_OK, mm, parseOptions, problemsMessage, readGeometryFile, readSessionFile, required, table, type Io } from './common';
import { CHECK_USAGE } from './usage';


export async function runCheck(args: string[], io: Io): Promise<number> {
  const o = parseOptions(args, { model: { type: 'string' }, data: { type: 'string' }, 'allow-outside-limits': { type: 'boolean' } }, CHECK_USAGE);
  const modelPath = required(o.model, '--model', CHECK_USAGE);
  const dataPath = required(o.data, '--data', CHECK_USAGE);
  const geometry = await readGeometryFile(modelPath);
  const session = await readSessionFile(dataPath, geometry, o['allow-outside-limits'] === true, io);
  let r: ReturnType<typeof checkGeometry>;
  try {
    r = checkGeometry(geometry, session.poses);
  } catch (e) {
    if (e instanceof EngineInputError) throw new CliError(problemsMessage(`cannot check ${modelPath} against ${dataPath}:`, e.problems.map((p) => ({ ...p, file: p.file ?? dataPath }))));
    throw e;
  }
  io.out(`${geometry.name} (${modelPath}) against ${dataPath}: ${r.stats.n} poses${r.registered ? ', measurement frame registered to the model (no base in the geometry)' : ''}.`);
  io.out(
    table([
      ['3-D error', 'RMS', 'mean', 'p95', 'max'],
      ['', mm(r.stats.rms), mm(r.stats.mean), mm(r.stats.p95), mm(r.stats.max)],
    ])
      .map((l) => '  ' + l)
      .join('\n'),
  );
  const worst = [...r.poses].sort((a, b) => b.error - a.error).slice(0, 5);
  io.out(`Largest errors: ${worst.map((p) => `${p.label} (line ${p.line}) ${mm(p.error)}`).join(', ')}`);
  if (session.repeatGroups > 0) {
    const withBase = { ...geometry, base: r.base };
    const res = iso9283(repeatGroups(session.poses, (q) => forwardPoint(withBase, q)));
    io.out(`ISO 9283, ${res.poses.length} repeated poses: AP ${mm(res.ap)} (${res.apPose}), RP ${mm(res.rp)} (${res.rpPose}).`);
  }
  return EXIT_OK;
}
