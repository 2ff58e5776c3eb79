/** `offsetry fit`: identify a calibrated geometry from a nominal one and a measured session. */
import { resolve } from 'node:path';
import { performance } from 'node:perf_hooks';
import { fitSession, type FitReport } from '../lib/engine/fit';
import { serializeGeometry } from '../lib/engine/geometry';
import { iso9283, repeatGroups, type Iso9283Result } from '../lib/engine/iso9283';
import { forwardPoint } from '../lib/engine/kinematics';
import { DEFAULT_JUDGEMENT, fitVerdicts, type Verdicts } from '../lib/engine/plausibility';
import { EngineInputError } from '../lib/engine/types';
import {
  CliError,
  EXIT_OK,
  checkOutputPath,
  mm,
  ms,
  numberOption,
  parseOptions,
  problemsMessage,
  readGeometryFile,
  readSessionFile,
  required,
  table,
  writeOutputs,
  type Io,
} from './common';
import { FIT_USAGE } from './usage';


export interface FitCliReport extends FitReport {
  /** ISO 9283 AP/RP of the calibrated geometry, when the session repeats poses. */
  iso9283?: Iso9283Result;
  /** The plausibility verdicts (src/lib/engine/plausibility.ts), the same the product applies. */
  verdicts?: Verdicts;
}

/** Exit status of an implausible fit (the files are written all the same). */
export const EXIT_IMPLAUSIBLE = 7;

export async function runFit(args: string[], io: Io): Promise<number> {
  const started = performance.now();
  const o = parseOptions(
    args,
    {
      model: { type: 'string' },
      data: { type: 'string' },
      out: { type: 'string' },
      report: { type: 'string' },
      holdout: { type: 'string' },
      seed: { type: 'string' },
      loss: { type: 'string' },
      'loss-scale-mm': { type: 'string' },
      exclude: { type: 'string', multiple: true },
      'noise-mm': { type: 'string' },
      'allow-outside-limits': { type: 'boolean' },
      'length-bound': { type: 'string' },
      'angle-bound': { type: 'string' },
      'tool-fixture': { type: 'boolean' },
    },
    FIT_USAGE,
  );
  const modelPath = required(o.model, '--model', FIT_USAGE);
  const dataPath = required(o.data, '--data', FIT_USAGE);
  const outPath = required(o.out, '--out', FIT_USAGE);
  const holdout = numberOption(o.holdout, '--holdout', (v) => v >= 0 && v <= 0.9, 'a fraction from 0 to 0.9') ?? 0.2;
  const seed = numberOption(o.seed, '--seed', (v) => Number.isInteger(v), 'an integer') ?? 1;
  const loss = o.loss === undefined ? 'none' : String(o.loss);
  if (!['none', 'huber', 'cauchy'].includes(loss)) throw new CliError(`--loss: "${loss}" is not valid (expected huber, cauchy or none)\n\n${FIT_USAGE}`, 2);
  const lossScale = numberOption(o['loss-scale-mm'], '--loss-scale-mm', (v) => v > 0, 'a positive length in mm');
  if (lossScale !== undefined && loss === 'none') throw new CliError('--loss-scale-mm needs --loss huber or --loss cauchy', 2);
  const noiseMm = numberOption(o['noise-mm'], '--noise-mm', (v) => v > 0, 'a positive length in mm (1 σ per coordinate)');
  const exclude = parseExclude(o.exclude as string[] | undefined);
  const judgement = {
    lengthBoundMm: numberOption(o['length-bound'], '--length-bound', (v) => v > 0, 'a positive length in mm') ?? DEFAULT_JUDGEMENT.lengthBoundMm,
    angleBoundDeg: numberOption(o['angle-bound'], '--angle-bound', (v) => v > 0, 'a positive angle in degrees') ?? DEFAULT_JUDGEMENT.angleBoundDeg,
    instrumentNoiseMm: noiseMm ?? DEFAULT_JUDGEMENT.instrumentNoiseMm,
    toolFixture: o['tool-fixture'] === true,
  };
  const outFull = checkOutputPath(outPath, '--out');
  const reportFull = typeof o.report === 'string' ? checkOutputPath(o.report, '--report') : undefined;
  if (reportFull && reportFull === outFull) throw new CliError('--out and --report name the same file', 2);
  for (const [flag, input] of [['--model', modelPath], ['--data', dataPath]] as const) {
    if (resolve(input) === outFull || resolve(input) === reportFull) throw new CliError(`an output would overwrite the input ${flag} ${input}`, 2);
  }

  const nominal = await readGeometryFile(modelPath);
  const session = await readSessionFile(dataPath, nominal, o['allow-outside-limits'] === true, io);

  let report: FitCliReport;
  try {
    report = fitSession(nominal, session.poses, {
      holdout, seed, useSplitColumn: true, robust: loss as 'none' | 'huber' | 'cauchy', exclude,
      ...(lossScale !== undefined ? { robustScaleMm: lossScale } : {}),
      ...(noiseMm !== undefined ? { noiseMm } : {}),
    });
  } catch (e) {
    if (e instanceof EngineInputError) {
      throw new CliError(problemsMessage(`cannot fit ${modelPath} to ${dataPath}:`, e.problems.map((p) => ({ ...p, file: p.file ?? dataPath }))));
    }
    throw e;
  }
  report.verdicts = fitVerdicts(report, session.poses, judgement);
  if (session.repeatGroups > 0) {
    report.iso9283 = iso9283(repeatGroups(session.poses, (q) => forwardPoint(report.calibrated, q)));
  }

  const outputs = [{ path: outFull, content: serializeGeometry(report.calibrated) }];
  if (reportFull) outputs.push({ path: reportFull, content: JSON.stringify(report, null, 2) + '\n' });
  await writeOutputs(outputs);

  for (const line of fitSummary(report, { modelPath, dataPath, hasSplit: session.hasSplit, holdout })) io.out(line);
  io.out(`Wrote ${outPath}${o.report ? ` and ${o.report}` : ''} (total ${ms(performance.now() - started)}).`);
  return report.verdicts.level === 'implausible' ? EXIT_IMPLAUSIBLE : EXIT_OK;
}

/** --exclude P12,P30 (repeatable): pose labels or line:N, comma-separated. */
function parseExclude(values: string[] | undefined): string[] {
  const out: string[] = [];
  for (const v of values ?? []) {
    for (const part of v.split(',')) {
      const label = part.trim();
      if (!label) throw new CliError(`--exclude: "${v}" has an empty pose label (expected labels or line:N, comma-separated)`, 2);
      out.push(label);
    }
  }
  return [...new Set(out)];
}

/** Structured notes ({ code, severity, message, advice }): the engine's warnings, or any verdicts beside them. */
export interface NoteLike { code: string; severity: string; message: string; advice?: string }

export function noteLines(title: string, notes: NoteLike[]): string[] {
  if (!notes.length) return [];
  const lines = [`${title}:`];
  for (const w of notes) {
    lines.push(`  [${w.severity}] ${w.message}`);
    if (w.advice) lines.push(`      → ${w.advice}`);
  }
  return lines;
}

export function fitSummary(r: FitCliReport, ctx: { modelPath: string; dataPath: string; hasSplit: boolean; holdout: number }): string[] {
  const roles = { fit: 0, holdout: 0, excluded: 0 };
  for (const p of r.poses) roles[p.role]++;
  const lines: string[] = [];
  const held = roles.holdout ? `, ${roles.holdout} held out ${ctx.hasSplit ? 'by the split column' : `at random (${ctx.holdout})`}` : ', none held out';
  lines.push(`Fitted ${r.nominal.name} (${ctx.modelPath}) to ${ctx.dataPath}: ${r.poses.length} poses, ${roles.fit} used for the fit${held}${roles.excluded ? `, ${roles.excluded} excluded` : ''}.`);
  const rows = [['3-D error', 'before', 'after']];
  const s = r.statistics;
  rows.push(['fit RMS', mm(s.fit.before.rms), mm(s.fit.after.rms)]);
  rows.push(['fit max', mm(s.fit.before.max), mm(s.fit.after.max)]);
  if (s.holdout) {
    rows.push([`hold-out RMS (${s.holdout.after.n})`, mm(s.holdout.before.rms), mm(s.holdout.after.rms)]);
    rows.push(['hold-out max', mm(s.holdout.before.max), mm(s.holdout.after.max)]);
  }
  lines.push(...table(rows).map((l) => '  ' + l));
  const fixed = r.parameters.filter((p) => p.status === 'fixed');
  lines.push(`Parameters: ${r.parameters.length - fixed.length} identified, ${fixed.length} fixed at nominal${fixed.length ? ':' : '.'}`);
  for (const p of fixed) lines.push(`  ${p.key}: ${p.reason ?? 'not determined by the data'}`);
  if (r.highCorrelations.length) lines.push(`Strongly correlated pairs (|r| > 0.95): ${r.highCorrelations.map((c) => `${c.a}/${c.b} ${c.r.toFixed(3)}`).join(', ')}`);
  if (r.outliers.length) lines.push(`Outliers (standardised residual above threshold): ${r.outliers.join(', ')}`);
  lines.push(`Iterations: ${r.iterations.length}${r.converged ? '' : ' (NOT converged)'}: ${r.stopReason}; condition number ${r.observability.conditionNumber.toExponential(2)}.`);
  const o = r.options;
  lines.push(`Loss: ${o.robust === 'none' ? 'least squares' : `${o.robust} (scale ${mm(o.robustScaleMm)})`}; instrument noise ${mm(o.noiseMm)} per coordinate; residual σ ${mm(r.residualSigmaMm)}.`);
  lines.push(`Standard errors: ${r.uncertaintyNote}`);
  lines.push(...noteLines('Warnings', r.warnings));
  // Verdicts on the result's plausibility, when the engine provides them (kept apart from the warnings).
  const verdicts = (r as { verdicts?: NoteLike[] }).verdicts;
  if (Array.isArray(verdicts)) lines.push(...noteLines('Verdicts', verdicts));
  if (r.iso9283 && r.iso9283.poses.length) {
    lines.push(`ISO 9283, ${r.iso9283.poses.length} repeated poses (calibrated model as commanded position): AP ${mm(r.iso9283.ap)} (${r.iso9283.apPose}), RP ${mm(r.iso9283.rp)} (${r.iso9283.rpPose}).`);
  }
  if (r.verdicts) {
    const mark = { pass: '✓', caution: '▲', implausible: '✕' } as const;
    lines.push(`Plausibility: ${r.verdicts.level.toUpperCase()}`);
    for (const v of r.verdicts.verdicts) lines.push(`  ${mark[v.level]} ${v.title}: ${v.reason}`);
  }
  lines.push(`Time: fit ${ms(r.timing.totalMs)} in-process.`);
  return lines;
}
