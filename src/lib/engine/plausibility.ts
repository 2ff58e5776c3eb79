/**
 * Plausibility gate: is a session (before a fit) or a fit's result believable as a calibration of THIS
 * unit? One set of rules, used by the pose-set check of a session, by every fit and by `offsetry fit`.
 * Each rule gives a verdict with its reason in plain words: pass, caution, or implausible. An implausible
 * fit cannot be submitted for review without a written override by an engineer.
 *
 * Rules (defaults are engineer-editable per arm model):
 * - nominal-error: the nominal model's RMS error after registering the tracker frame. An arm whose every
 *   parameter lies within the plausible bounds is at most about E = 2 · (b_mm + L · b_rad) off, with L
 *   the arm's characteristic length (sum of |a|, |d| and the tool offset: an angle error δ moves the point
 *   by about L·δ); implausible above E, caution above E / 2. When it fails, the same check is re-run with
 *   the joint readings as radians, the joint columns shifted by one, and the measured points in metres or
 *   inches, and a reading that explains the error is named.
 * - joint-readings: every revolute reading within ±2π (one turn in radians) while the model's limits allow more than ±10° looks
 *   like radians; most poses outside the joint limits as given but inside them with the columns shifted by
 *   one looks like a shifted joint order.
 * - parameter-changes (fits): an identified arm parameter changed from nominal by more than the plausible
 *   bound (default 5 mm, 1°). The base frame is where the tracker stood and is never judged; the tool point
 *   only when the model's tool is a fixed fixture.
 * - residual-noise (fits): the residual σ (per coordinate) against the instrument's stated noise: caution
 *   above 5×, implausible above 20× (an error the model does not describe: elasticity, heat, a loose
 *   target, a wrong model).
 */
import { checkGeometry, type FitReport } from './fit';
import { characteristicLength } from './parameters';
import type { ArmGeometry, SessionPose } from './types';

export interface JudgementSettings {
  /** Plausible change of a length parameter from nominal, mm. */
  lengthBoundMm: number;
  /** Plausible change of an angle parameter from nominal, degrees. */
  angleBoundDeg: number;
  /** The instrument's stated noise, mm (1σ per coordinate). */
  instrumentNoiseMm: number;
  /** The tool is a fixed fixture (its point is judged by the fleet view and by the change bound). */
  toolFixture: boolean;
}

export const DEFAULT_JUDGEMENT: JudgementSettings = { lengthBoundMm: 5, angleBoundDeg: 1, instrumentNoiseMm: 0.05, toolFixture: false };

export const NOISE_CAUTION = 5;
export const NOISE_IMPLAUSIBLE = 20;

export type VerdictLevel = 'pass' | 'caution' | 'implausible';

export interface Verdict {
  rule: 'nominal-error' | 'joint-readings' | 'parameter-changes' | 'residual-noise';
  level: VerdictLevel;
  title: string;
  /** Plain words: what was measured, against what, and what it likely means. */
  reason: string;
  measured?: number;
  limit?: number;
}

export interface Verdicts {
  level: VerdictLevel;
  verdicts: Verdict[];
  settings: JudgementSettings;
  /** The rule of each check in one sentence each, for the page. */
  rules: string[];
}

const worst = (v: Verdict[]): VerdictLevel => (v.some((x) => x.level === 'implausible') ? 'implausible' : v.some((x) => x.level === 'caution') ? 'caution' : 'pass');
const f3 = (v: number) => v.toFixed(3);

/** E: the largest nominal RMS error an arm within its plausible bounds would plausibly show (mm). */
export function nominalErrorLimit(nominal: ArmGeometry, s: JudgementSettings): number {
  return 2 * (s.lengthBoundMm + characteristicLength(nominal) * (s.angleBoundDeg * Math.PI) / 180);
}

export function ruleSentences(nominal: ArmGeometry, s: JudgementSettings): string[] {
  const E = nominalErrorLimit(nominal, s);
  return [
    `Nominal error: implausible when the nominal model's RMS error after registering the tracker frame exceeds ${E.toFixed(1)} mm (2 × (${s.lengthBoundMm} mm + reach ${characteristicLength(nominal).toFixed(0)} mm × ${s.angleBoundDeg}°)), caution above half of it.`,
    `Joint readings: implausible when every revolute reading lies within ±2π although the joints move further (radians?) or the readings fit the joint limits only with the columns shifted by one.`,
    `Parameter changes: implausible when an identified arm parameter moves more than ${s.lengthBoundMm} mm or ${s.angleBoundDeg}° from nominal (base frame never; tool point only for a fixed fixture).`,
    `Residual spread: caution above ${NOISE_CAUTION}×, implausible above ${NOISE_IMPLAUSIBLE}× the instrument's stated noise of ${s.instrumentNoiseMm} mm.`,
  ];
}

function nominalRms(nominal: ArmGeometry, poses: SessionPose[]): number | null {
  try {
    return checkGeometry(nominal, poses).stats.rms;
  } catch {
    return null;
  }
}

const revolute = (g: ArmGeometry) => g.joints.map((j) => j.type === 'revolute');

/** Readings that would explain a large nominal error, tried in turn; the best one under the limit. */
function explain(nominal: ArmGeometry, poses: SessionPose[], rms: number, limit: number): string | null {
  const rev = revolute(nominal);
  const n = nominal.joints.length;
  const tries: { what: string; poses: SessionPose[] }[] = [
    { what: 'the joint readings are in radians, not degrees', poses: poses.map((p) => ({ ...p, q: p.q.map((v, k) => (rev[k] ? (v * 180) / Math.PI : v)) })) },
    { what: 'the joint columns are shifted by one (q2 holds joint 1)', poses: poses.map((p) => ({ ...p, q: p.q.map((_, k) => p.q[(k + 1) % n]!) })) },
    { what: 'the joint columns are shifted by one (q1 holds joint 2)', poses: poses.map((p) => ({ ...p, q: p.q.map((_, k) => p.q[(k + n - 1) % n]!) })) },
    { what: 'the measured points are in metres, not millimetres', poses: poses.map((p) => ({ ...p, x: p.x * 1000, y: p.y * 1000, z: p.z * 1000 })) },
    { what: 'the measured points are in inches, not millimetres', poses: poses.map((p) => ({ ...p, x: p.x * 25.4, y: p.y * 25.4, z: p.z * 25.4 })) },
  ];
  let best: { what: string; rms: number } | null = null;
  for (const t of tries) {
    const r = nominalRms(nominal, t.poses);
    if (r !== null && r < limit / 2 && r < rms / 4 && (!best || r < best.rms)) best = { what: t.what, rms: r };
  }
  return best ? `${best.what}: read that way the nominal error would be ${f3(best.rms)} mm` : null;
}

/** The nominal-error verdict from a nominal RMS (mm) already computed (the fit's "before"). */
export function nominalErrorVerdict(nominal: ArmGeometry, poses: SessionPose[], rms: number, s: JudgementSettings): Verdict {
  const E = nominalErrorLimit(nominal, s);
  const base = { rule: 'nominal-error' as const, measured: rms, limit: E };
  if (rms <= E / 2) {
    return { ...base, level: 'pass', title: 'Nominal error as expected', reason: `The nominal model is ${f3(rms)} mm RMS off after registration, within what an arm inside its plausible bounds shows (up to ${E.toFixed(1)} mm).` };
  }
  if (rms <= E) {
    return { ...base, level: 'caution', title: 'Nominal error large', reason: `The nominal model is ${f3(rms)} mm RMS off after registration, more than half of the ${E.toFixed(1)} mm an arm inside its plausible bounds shows. Check the unit and the setup before trusting the fit.` };
  }
  const why = explain(nominal, poses, rms, E);
  return {
    ...base,
    level: 'implausible',
    title: 'These measurements do not look like this arm model',
    reason:
      `The nominal model is ${f3(rms)} mm RMS off after registration, far above the ${E.toFixed(1)} mm an arm inside its plausible bounds (${s.lengthBoundMm} mm, ${s.angleBoundDeg}°) could show. ` +
      (why ? `Likely ${why}.` : 'Likely a session of a different arm or model, the wrong unit, wrong units in the file or a wrong joint order.'),
  };
}

/** Radians and shifted joint order, from the readings and the model's limits alone. */
export function jointReadingsVerdict(nominal: ArmGeometry, poses: SessionPose[]): Verdict {
  const rev = revolute(nominal);
  const n = nominal.joints.length;
  const base = { rule: 'joint-readings' as const };
  if (!poses.length) return { ...base, level: 'pass', title: 'Joint readings', reason: 'No poses.' };
  const revIdx = rev.map((r, k) => (r ? k : -1)).filter((k) => k >= 0);
  if (revIdx.length) {
    const within = poses.every((p) => revIdx.every((k) => Math.abs(p.q[k]!) <= 2 * Math.PI + 1e-6));
    const spread = Math.max(...revIdx.map((k) => Math.max(...poses.map((p) => p.q[k]!)) - Math.min(...poses.map((p) => p.q[k]!))));
    const wide = revIdx.some((k) => (nominal.joints[k]!.max ?? 180) - (nominal.joints[k]!.min ?? -180) > 20);
    if (within && wide && spread > 0.5 && poses.length >= 5) {
      return { ...base, level: 'implausible', title: 'Joint readings look like radians', reason: `Every revolute reading lies within ±2π, one turn in radians (largest spread ${spread.toFixed(3)}) although the model's joints move much further: the file likely holds radians where degrees are expected.` };
    }
  }
  const outside = (shift: number) => {
    let count = 0;
    for (const p of poses) {
      const bad = nominal.joints.some((j, k) => {
        const v = p.q[(k + shift + n) % n]!;
        return (j.min !== undefined && v < j.min - 1e-9) || (j.max !== undefined && v > j.max + 1e-9);
      });
      if (bad) count++;
    }
    return count / poses.length;
  };
  const hasLimits = nominal.joints.some((j) => j.min !== undefined || j.max !== undefined);
  if (hasLimits && n > 1) {
    const asGiven = outside(0);
    const shifted = Math.min(outside(1), outside(-1));
    if (asGiven > 0.2 && shifted <= 0.02) {
      return { ...base, level: 'implausible', title: 'Joint order looks shifted', reason: `${(100 * asGiven).toFixed(0)} % of the poses are outside the joint limits as the columns stand, but only ${(100 * shifted).toFixed(0)} % with the columns shifted by one: the joint columns are likely in the wrong order.` };
    }
  }
  return { ...base, level: 'pass', title: 'Joint readings look like degrees in the model\'s order', reason: 'The readings use the joint ranges the model allows, in the model\'s joint order.' };
}

/** The checks that need no fit: for the pose-set check of a session. */
export function sessionVerdicts(nominal: ArmGeometry, poses: SessionPose[], s: JudgementSettings = DEFAULT_JUDGEMENT, nominalRmsMm?: number): Verdicts {
  const verdicts: Verdict[] = [jointReadingsVerdict(nominal, poses)];
  const rms = nominalRmsMm ?? nominalRms(nominal, poses);
  if (rms !== null) verdicts.unshift(nominalErrorVerdict(nominal, poses, rms, s));
  return { level: worst(verdicts), verdicts, settings: s, rules: ruleSentences(nominal, s) };
}

/** Every check, for a fit's result. */
export function fitVerdicts(report: Pick<FitReport, 'nominal' | 'parameters' | 'statistics' | 'residualSigmaMm'>, poses: SessionPose[], s: JudgementSettings = DEFAULT_JUDGEMENT): Verdicts {
  const nominal = report.nominal;
  const session = sessionVerdicts(nominal, poses, s, report.statistics.fit.before.rms);
  const verdicts = [...session.verdicts];
  const judged = report.parameters.filter((p) => p.status === 'identified' && p.group !== 'base' && (p.group !== 'tool' || s.toolFixture));
  const beyond = judged.filter((p) => Math.abs(p.change) > (p.unit === 'mm' ? s.lengthBoundMm : s.angleBoundDeg));
  const show = (p: (typeof judged)[number]) => `${p.key} ${p.change > 0 ? '+' : ''}${p.unit === 'mm' ? p.change.toFixed(3) : p.change.toFixed(4)} ${p.unit === 'mm' ? 'mm' : '°'}`;
  verdicts.push(
    beyond.length
      ? {
          rule: 'parameter-changes',
          level: 'implausible',
          title: `${beyond.length} parameter change${beyond.length === 1 ? '' : 's'} beyond the plausible bounds`,
          reason: `${beyond.slice(0, 6).map(show).join(', ')}${beyond.length > 6 ? ` and ${beyond.length - 6} more` : ''} — more than ${s.lengthBoundMm} mm or ${s.angleBoundDeg}° from nominal, which a unit of this model does not plausibly show: a different arm, a wrong model, or a crash.`,
          measured: Math.max(...beyond.map((p) => Math.abs(p.change))),
        }
      : { rule: 'parameter-changes', level: 'pass', title: 'Parameter changes within the plausible bounds', reason: `Every identified arm parameter is within ${s.lengthBoundMm} mm / ${s.angleBoundDeg}° of nominal.` },
  );
  const sigma = report.residualSigmaMm;
  const ratio = sigma / s.instrumentNoiseMm;
  const base = { rule: 'residual-noise' as const, measured: sigma, limit: NOISE_IMPLAUSIBLE * s.instrumentNoiseMm };
  verdicts.push(
    !(Number.isFinite(ratio))
      ? { ...base, level: 'pass', title: 'Residual spread', reason: 'No residual spread to compare (too few poses).' }
      : ratio > NOISE_IMPLAUSIBLE
        ? { ...base, level: 'implausible', title: 'Residuals far above the instrument noise', reason: `The residual σ is ${f3(sigma)} mm per coordinate, ${ratio.toFixed(0)}× the instrument's stated ${s.instrumentNoiseMm} mm: the model does not describe this arm (wrong model, loose target, slipping joint).` }
        : ratio > NOISE_CAUTION
          ? { ...base, level: 'caution', title: 'Residuals above the instrument noise', reason: `The residual σ is ${f3(sigma)} mm per coordinate, ${ratio.toFixed(1)}× the instrument's stated ${s.instrumentNoiseMm} mm: some error is not modelled (elasticity, heat, target mount).` }
          : { ...base, level: 'pass', title: 'Residuals at instrument noise', reason: `The residual σ is ${f3(sigma)} mm per coordinate, ${ratio.toFixed(1)}× the instrument's stated ${s.instrumentNoiseMm} mm.` },
  );
  return { level: worst(verdicts), verdicts, settings: s, rules: session.rules };
}
