/** `offsetry plan`: a pose plan (joint configurations) for the next session, as CSV. */
import { planPoses } from '../lib/engine/planner';
import { planToCsv } from '../lib/engine/session-csv';
import { EngineInputError } from '../lib/engine/types';
import { CliError, EXIT_OK, checkOutputPath, numberOption, parseOptions, problemsMessage, readGeometryFile, required, writeOutputs, type Io } from './common';
import { PLAN_USAGE } from './usage';


export async function runPlan(args: string[], io: Io): Promise<number> {
  const o = parseOptions(
    args,
    { model: { type: 'string' }, count: { type: 'string' }, out: { type: 'string' }, seed: { type: 'string' }, index: { type: 'string' } },
    PLAN_USAGE,
  );
  const modelPath = required(o.model, '--model', PLAN_USAGE);
  const count = numberOption(required(o.count, '--count', PLAN_USAGE), '--count', (v) => Number.isInteger(v) && v >= 1 && v <= 100_000, 'a whole number from 1 to 100000')!;
  const outPath = required(o.out, '--out', PLAN_USAGE);
  const seed = numberOption(o.seed, '--seed', (v) => Number.isInteger(v), 'an integer') ?? 1;
  const index = o.index ?? 'O1';
  if (index !== 'O1' && index !== 'O3' && index !== 'O4') throw new CliError(`--index: "${index}" is not valid (expected O1, O3 or O4)`, 2);
  const outFull = checkOutputPath(outPath, '--out');
  const geometry = await readGeometryFile(modelPath);
  let plan: ReturnType<typeof planPoses>;
  try {
    plan = planPoses(geometry, { count, seed, index });
  } catch (e) {
    if (e instanceof EngineInputError) throw new CliError(problemsMessage(`cannot plan poses for ${modelPath}:`, e.problems.map((p) => ({ ...p, file: p.file ?? modelPath }))));
    throw e;
  }
  await writeOutputs([{ path: outFull, content: planToCsv(plan.q, geometry) }]);
  const q = plan.quality;
  io.out(`Planned ${plan.q.length} poses for ${geometry.name} (${modelPath}), seed ${seed}, maximising ${index}.`);
  io.out(`  O1 ${q.O1.toPrecision(4)}, O3 ${q.O3.toPrecision(4)}, O4 ${q.O4.toPrecision(4)}, condition number ${q.conditionNumber.toExponential(2)}; ${q.identifiable} of ${q.parameterCount} parameters identifiable.`);
  for (const w of q.warnings) io.err(`warning: ${w}`);
  io.out(`Wrote ${outPath}.`);
  return EXIT_OK;
}
