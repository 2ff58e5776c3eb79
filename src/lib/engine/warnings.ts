/**
 * Fit warnings: what makes a fit's numbers weaker than they look, in plain words with what to do.
 * Two kinds, both computed for every fit (command line, report, web):
 *   - excitation: joints that barely move, a high condition number, standard errors above the arm's
 *     limits, strongly correlated pairs (the poses do not determine the parameters well);
 *   - noise: the residual spread far above the instrument noise (the model does not describe the arm).
 * Every warning is structured ({ code, severity, message, advice }) and states its rule in the message,
 * so screens can show it beside the plausibility verdicts without parsing text.
 *
 * Also here: detecting parallel and nearly parallel consecutive joint axes from the nominal geometry,
 * where the DH common normal is ill-defined and Hayati's β is needed (Hayati & Mirmirani 1985).
 */
import type { ArmGeometry } from './types';
import { DEG } from './parameters';
import { jointKey } from './layout';

export type WarningSeverity = 'info' | 'warning' | 'serious';

export interface FitWarning {
  /** Stable machine-readable code, e.g. 'joint-barely-moves'. */
  code: string;
  severity: WarningSeverity;
  /** What was found, with the rule that fired. */
  message: string;
  /** What to do about it. */
  advice: string;
  /** Joint names or parameter keys concerned (for screens to highlight). */
  subjects?: string[];
}

/**
 * Consecutive axes closer to parallel than this get Hayati's β (common practice: the common normal of
 * two axes a few degrees apart already lies far along them; 5° is a value from memory, not a standard).
 */
export const NEAR_PARALLEL_DEG = 5;

export interface ParallelAxes {
  /** Joint whose row carries the β of the link between the two axes (DH: the first joint; MDH: the second). */
  jointIndex: number;
  key: string;
  first: string;
  second: string;
  /** Angle between the two axes, deg (0 = exactly parallel). */
  angleDeg: number;
  /** Plain-words reason, e.g. "added β to J2 because J2 ∥ J3". */
  reason: string;
}

/**
 * Pairs of consecutive revolute joints whose axes are parallel or within NEAR_PARALLEL_DEG of it, from the
 * link twist: DH A_i = …Rx(α_i)·Ry(β_i) carries joint i's axis z_{i−1} to joint i+1's axis z_i; MDH joint
 * i+1's Rx(α)·Ry(β) does the same. The axes' angle is acos(|cos α · cos β|).
 */
export function parallelAxes(g: ArmGeometry): ParallelAxes[] {
  const out: ParallelAxes[] = [];
  for (let i = 0; i + 1 < g.joints.length; i++) {
    const a = g.joints[i], b = g.joints[i + 1];
    if (a.type !== 'revolute' || b.type !== 'revolute') continue;
    const carrier = g.convention === 'dh' ? i : i + 1;
    const j = g.joints[carrier];
    const c = Math.abs(Math.cos(j.alpha * DEG) * Math.cos((j.beta ?? 0) * DEG));
    const angleDeg = Math.acos(Math.min(1, c)) / DEG;
    if (angleDeg >= NEAR_PARALLEL_DEG) continue;
    const rel = angleDeg < 1e-9 ? '∥' : `nearly ∥ (${angleDeg.toFixed(2)}° apart)`;
    out.push({
      jointIndex: carrier, key: jointKey(carrier, 'beta'), first: a.name, second: b.name, angleDeg,
      reason: `added β to ${j.name} because ${a.name} ${rel} ${b.name}`,
    });
  }
  return out;
}

/** Default instrument noise, mm per coordinate, when the session gives none. */
export const DEFAULT_NOISE_MM = 0.05;
/** The residual spread is "far above" the noise beyond this ratio. */
export const NOISE_RATIO = 2;

/**
 * σ̂ (the residual standard deviation per coordinate, mm) against the instrument noise (mm per coordinate).
 * Rule: σ̂ > 2 × noise. With m − p ≥ 50 residual degrees of freedom, σ̂²/σ² ~ χ²/dof exceeds 4 with
 * probability below 10⁻¹⁵ when the model is right (closed form of the χ² tail), so the warning
 * fires only when the model or the data are at fault.
 */
export function noiseWarning(
  sigmaMm: number, noiseMm: number, noiseGiven: boolean, parallel: ParallelAxes[], betaListed: (key: string) => boolean,
): FitWarning | null {
  if (!(sigmaMm > NOISE_RATIO * noiseMm)) return null;
  const causes: string[] = [];
  const missing = parallel.filter((p) => !betaListed(p.key));
  if (missing.length) causes.push(`parallel axes without β (${missing.map((p) => `${p.first} ∥ ${p.second}`).join(', ')}; β was not identified)`);
  causes.push('a nominal geometry of another arm or model, or a wrong convention (DH vs modified DH)');
  causes.push('joint readings in the wrong unit or order, or a joint zero shifted by whole turns');
  causes.push('the target or the tracker moved during the session, or a few bad measurements (try the Huber or Cauchy loss)');
  causes.push('effects the geometric model does not describe (joint compliance under load, gear backlash, temperature drift)');
  return {
    code: 'residual-above-noise',
    severity: 'serious',
    message: `The residual spread is ${sigmaMm.toFixed(3)} mm per coordinate, ${(sigmaMm / noiseMm).toFixed(1)}× the instrument noise of ${noiseMm.toFixed(3)} mm${noiseGiven ? '' : ' (default; none was given for the session)'} (rule: above ${NOISE_RATIO}×). The model does not explain the measurements.`,
    advice: `Likely causes: ${causes.join('; ')}. Check these before using the calibrated set.`,
  };
}

export interface ExcitationInput {
  geometry: ArmGeometry;
  /** Joint readings of the fit poses (deg / mm), one array per pose. */
  q: number[][];
  conditionNumber: number;
  /** Identified parameters with their standard error in report units (mm or deg). */
  parameters: { key: string; unit: 'mm' | 'deg'; standardError: number | null }[];
  highCorrelations: { a: string; b: string; r: number }[];
  /** Characteristic length of the arm (mm): angle limits are the length limit over it. */
  characteristicLength: number;
  /** Instrument noise per coordinate (mm). */
  noiseMm: number;
}

/** A joint "barely moves" below this fraction of its range (limits, or 360° / 1000 mm without limits). */
export const SPAN_FRACTION = 0.25;
/** Condition number (angles scaled by the characteristic length) above which the fit is poorly conditioned. */
export const CONDITION_LIMIT = 1000;
/** A length standard error above max(this, 2 × noise) mm is too large for a calibration. */
export const LENGTH_SE_LIMIT_MM = 0.05;
/** More strongly correlated pairs than this make the correlation note a warning (up to it: information). */
export const CORRELATED_PAIRS_LIMIT = 3;

/**
 * Reach (mm) over which an angle parameter moves the tool point: the links from its joint to the end
 * plus the tool offset (Σ |a| + |d| of that joint and the later ones + |tool|), at least 50 mm; the
 * whole arm's characteristic length for the base.
 */
export function leverArm(g: ArmGeometry, key: string, characteristicLength: number): number {
  const m = /^J(\d+)\./.exec(key);
  if (!m) return characteristicLength;
  let L = 0;
  for (let k = Number(m[1]) - 1; k < g.joints.length; k++) L += Math.abs(g.joints[k].a) + Math.abs(g.joints[k].d);
  const t = g.tool;
  if (t) L += Math.hypot(t.x, t.y, t.z);
  return Math.max(L, 50);
}

/**
 * Excitation warnings. Rules (each stated in its message):
 *   - a joint whose readings span less than 25 % of its range;
 *   - condition number above 1000 (common practice treats 100–1000 as the edge of a well-posed calibration;
 *     from memory);
 *   - a length standard error above Lₘ = max(0.05 mm, 2 × noise), or an angle standard error above
 *     Lₘ / R rad with R the reach of the links after the angle's joint (leverArm: the angle then moves
 *     the tool point by Lₘ): the limits are specific to the arm's geometry and the instrument;
 *   - pairs of identified parameters with |r| > 0.95: information up to 3 pairs, a warning above.
 */
export function excitationWarnings(x: ExcitationInput): FitWarning[] {
  const out: FitWarning[] = [];
  const g = x.geometry;
  const still: string[] = [];
  const spans: string[] = [];
  g.joints.forEach((j, k) => {
    let lo = Infinity, hi = -Infinity;
    for (const q of x.q) { lo = Math.min(lo, q[k]); hi = Math.max(hi, q[k]); }
    const prismatic = j.type === 'prismatic';
    const range = j.min !== undefined && j.max !== undefined ? Math.min(j.max - j.min, prismatic ? Infinity : 360) : prismatic ? 1000 : 360;
    const span = x.q.length ? hi - lo : 0;
    if (span < SPAN_FRACTION * range) {
      still.push(j.name);
      const u = prismatic ? ' mm' : '°';
      spans.push(`${j.name} spans ${span.toFixed(1)}${u} of ${range.toFixed(0)}${u}`);
    }
  });
  const plan = 'The pose planner (offsetry plan, or "Pose plan for the next visit" on the unit page) can propose poses that move every joint.';
  if (still.length) {
    out.push({
      code: 'joint-barely-moves', severity: 'warning', subjects: still,
      message: `${still.length === 1 ? 'A joint barely moves' : 'Joints barely move'} over the fit poses: ${spans.join('; ')} (rule: less than ${SPAN_FRACTION * 100} % of the joint's range).`,
      advice: `Measure again moving ${still.join(', ')} over more of ${still.length === 1 ? 'its' : 'their'} range. ${plan}`,
    });
  }
  if (!(x.conditionNumber <= CONDITION_LIMIT)) {
    out.push({
      code: 'high-condition-number', severity: 'warning',
      message: `The condition number is ${Number.isFinite(x.conditionNumber) ? x.conditionNumber.toExponential(2) : 'infinite'} (rule: above ${CONDITION_LIMIT}; angles scaled by the arm's characteristic length ${x.characteristicLength.toFixed(0)} mm): small measurement errors are strongly amplified in some parameter combinations.`,
      advice: `Use poses that spread every joint over its range${still.length ? `, above all ${still.join(', ')}` : ''}, and more of them. ${plan}`,
    });
  }
  const lengthLimit = Math.max(LENGTH_SE_LIMIT_MM, 2 * x.noiseMm);
  const limitOf = (p: { key: string; unit: 'mm' | 'deg' }) => (p.unit === 'mm' ? lengthLimit : lengthLimit / leverArm(g, p.key, x.characteristicLength) / DEG);
  const big = x.parameters.filter((p) => p.standardError !== null && p.standardError > limitOf(p));
  if (big.length) {
    const worst = big.slice().sort((a, b) => b.standardError! / limitOf(b) - a.standardError! / limitOf(a));
    const shown = worst.slice(0, 6).map((p) => `${p.key} ± ${p.unit === 'mm' ? `${p.standardError!.toFixed(3)} mm` : `${p.standardError!.toFixed(4)}° (limit ${limitOf(p).toFixed(4)}°)`}`);
    out.push({
      code: 'large-standard-errors', severity: 'warning', subjects: big.map((p) => p.key),
      message: `${big.length} standard error${big.length === 1 ? ' is' : 's are'} above this arm's limits (rule: lengths above ${lengthLimit.toFixed(3)} mm; an angle above the one that moves the tool point by ${lengthLimit.toFixed(3)} mm at the reach of the links after it): ${shown.join(', ')}${big.length > 6 ? ', …' : ''}.`,
      advice: `These parameters are poorly determined by the poses. ${still.length ? `Move ${still.join(', ')} more, and add` : 'Add'} poses that vary the joints these parameters belong to. ${plan}`,
    });
  }
  if (x.highCorrelations.length) {
    // A few pairs are normal (e.g. a wrist link's offset and length with a short tool); many are not.
    const shown = x.highCorrelations.slice(0, 5).map((h) => `${h.a}/${h.b} (r = ${h.r.toFixed(3)})`);
    out.push({
      code: 'correlated-parameters', severity: x.highCorrelations.length > CORRELATED_PAIRS_LIMIT ? 'warning' : 'info',
      subjects: [...new Set(x.highCorrelations.flatMap((h) => [h.a, h.b]))],
      message: `${x.highCorrelations.length} pair${x.highCorrelations.length === 1 ? ' of parameters is' : 's of parameters are'} strongly correlated (rule: |r| > 0.95): ${shown.join(', ')}${x.highCorrelations.length > 5 ? ', …' : ''}. The poses hardly tell each pair apart, so errors in one are taken up by the other.`,
      advice: `Vary the joints these parameters belong to more independently of each other. ${plan}`,
    });
  }
  return out;
}
