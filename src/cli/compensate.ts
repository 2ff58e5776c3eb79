/** `offsetry compensate`: a robot program corrected for a calibrated geometry (inverse kinematics on the calibrated arm). */
import { promises as fs, existsSync, statSync } from 'node:fs';
import { resolve } from 'node:path';
import { compensateProgram, parseToolOption, type ProgramFrame } from '../lib/engine/compensate';
import { compensatedCsv, parseProgramCsv } from '../lib/engine/program-csv';
import { EngineInputError, formatProblem } from '../lib/engine/types';
import { checkOutputPath, CliError, EXIT_OK, EXIT_USAGE, mm, ms, parseOptions, problemsMessage, readGeometryFile, required, writeOutputs, type Io } from './common';
import { COMPENSATE_USAGE } from './usage';

export async function runCompensate(args: string[], io: Io): Promise<number> {
  const o = parseOptions(
    args,
    { model: { type: 'string' }, nominal: { type: 'string' }, targets: { type: 'string' }, out: { type: 'string' }, frame: { type: 'string' }, tool: { type: 'string' } },
    COMPENSATE_USAGE,
  );
  const modelPath = required(o.model, '--model', COMPENSATE_USAGE);
  const nominalPath = required(o.nominal, '--nominal', COMPENSATE_USAGE);
  const targetsPath = required(o.targets, '--targets', COMPENSATE_USAGE);
  const outPath = checkOutputPath(required(o.out, '--out', COMPENSATE_USAGE), '--out');
  const frame = (o.frame ?? 'base') as ProgramFrame;
  if (frame !== 'base' && frame !== 'measurement') throw new CliError(`--frame: "${String(o.frame)}" is not valid (expected base or measurement)`, EXIT_USAGE);
  let tool;
  if (o.tool !== undefined) {
    const t = parseToolOption(String(o.tool));
    if ('message' in t) throw new CliError(formatProblem(t), EXIT_USAGE);
    tool = t;
  }
  const calibrated = await readGeometryFile(modelPath);
  const nominal = await readGeometryFile(nominalPath);
  const full = resolve(targetsPath);
  if (!existsSync(full) || !statSync(full).isFile()) throw new CliError(`${targetsPath}: program file not found`);
  const program = parseProgramCsv(await fs.readFile(full, 'utf8'), targetsPath, calibrated.joints.length);
  if (!program.ok) throw new CliError(problemsMessage(`cannot read the program file ${targetsPath}:`, program.problems, program.truncated));
  let result;
  try {
    result = compensateProgram(calibrated, nominal, program, { frame, tool });
  } catch (e) {
    if (e instanceof EngineInputError) throw new CliError(problemsMessage(`cannot compensate with ${modelPath} against ${nominalPath}:`, e.problems.map((p) => ({ ...p, file: p.file ?? modelPath }))));
    throw e;
  }
  await writeOutputs([{ path: outPath, content: compensatedCsv(result.targets, calibrated.joints.length) }]);
  const c = result.counts;
  io.out(`${program.targets.length} ${program.kind} targets (${frame} frame) compensated for ${calibrated.name} in ${ms(result.milliseconds)}: ` +
    `${c.reached} reached, ${c.singular} near a singularity, ${c.jump} configuration jumps, ${c['outside-limits']} outside joint limits, ${c.unreachable} unreachable.`);
  io.out(`Correction: RMS ${mm(result.rmsCorrection)}, largest ${mm(result.maxCorrection)}. Written ${o.out}.`);
  for (const t of result.targets.filter((t) => t.status !== 'reached').slice(0, 10)) io.err(`note: ${t.target} (line ${t.line}): ${t.message}`);
  io.out('Before production use, run the compensated program with safeguards active and at reduced speed, confirm positions against known references, and keep the original program ready to restore.');
  return EXIT_OK;
}
