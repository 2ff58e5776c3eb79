/**
 * Fleet judgement: is a unit's calibrated geometry out of line with the other units of its model?
 * Pure (no database); the server runs it in a worker thread (src/lib/server/engine-runner.ts).
 *
 * The rule, per unit i and judged parameter k (deviation from nominal x_ik):
 * 1. Reference: the other units' deviations, after setting aside those more than SCREEN robust σ from
 *    their median (robust σ = 1.4826 · MAD, Hampel's identifier, common practice), so one odd unit does
 *    not widen everybody's limits. m = units left, x̄ and s² their mean and sample variance (m − 1).
 * 2. Spread, moderated: the fleet's parameters of the same group (lengths, twists, offsets …) share information about
 *    spread by empirical Bayes (Smyth 2004, "Linear models and empirical Bayes methods for assessing
 *    differential expression in microarray experiments", Stat. Appl. Genet. Mol. Biol. 3(1)): prior
 *    degrees of freedom d₀ and prior variance s₀² are estimated from the screened variances of all
 *    parameters of the group (from the OTHER units, capped at their pooled degrees of freedom); s̃² = (d₀ s₀² + (m − 1) s²) / (d₀ + m − 1) with ν = d₀ + m − 1 degrees of
 *    freedom. When the parameters' spreads look alike, d₀ is large and a small fleet borrows strength;
 *    when they differ, d₀ is small and each parameter stands on its own (plain Student t).
 * 3. Prediction: t = (x_ik − x̄) / (s̃ √(1 + 1/m)) is Student-t with ν degrees of freedom for a unit like
 *    the others (the prediction interval of a new observation, common practice); p = P(|T| > |t|).
 * 4. Multiplicity: a unit has K judged parameters; a parameter is out of line when p < α / K (α = FLEET_ALPHA)
 *    (Bonferroni), so a unit like the others is flagged with probability at most α.
 * The score shown is the signed normal-equivalent of p (the z with the same two-sided tail), so every
 * chart has one pair of lines at ± z(α / 2K) whatever the degrees of freedom: line, flag and sentence
 * are the same test. Limits in mm / ° are x̄ ± t(α / 2K, ν) · s̃ √(1 + 1/m).
 *
 * Only parameters that describe the arm are judged: never the base frame (where the tracker stood),
 * the tool point only when the model's tool is a fixed fixture; parameters without spread (fixed at
 * nominal in every fit) have nothing to judge.
 */
import { digamma, inverseTrigamma, normalUpperTail, studentTwoSidedCritical, studentTwoSidedP, trigamma } from './distributions';
import type { ParameterGroup } from './types';

/** Chance a unit like the others is flagged (per unit, over all its judged parameters): 4 %, leaving a margin under the 5 % the product promises. */
export const FLEET_ALPHA = 0.04;
/** Robust σ beyond which a reference value is set aside. */
export const SCREEN = 5;
/** Fewest units with the parameter for it to be judged (three others at least). */
export const MIN_UNITS = 4;

export interface FleetParameterInput {
  key: string;
  unit: 'mm' | 'deg';
  group: ParameterGroup;
}

export interface FleetJudgementInput {
  parameters: FleetParameterInput[];
  units: { id: string; deviations: Record<string, number> }[];
  /** The model's tool is a fixed fixture: judge the tool point too. */
  judgeTool?: boolean;
  alpha?: number;
}

export interface JudgedParameter extends FleetParameterInput {
  judged: boolean;
  /** Why not judged, in plain words. */
  reason?: string;
  n: number;
  median: number | null;
  robustSd: number | null;
  mean: number | null;
  sd: number | null;
}

export interface UnitParameterJudgement {
  score: number;
  p: number;
  centre: number;
  lower: number;
  upper: number;
  df: number | null;
  flagged: boolean;
}

export interface UnitJudgement {
  id: string;
  judgedCount: number;
  /** ± this normal-equivalent score is the line (z of α / 2K). */
  criticalScore: number;
  flagged: boolean;
  flags: string[];
  parameters: Record<string, UnitParameterJudgement>;
}

export interface FleetJudgement {
  alpha: number;
  rule: string;
  /** Prior of the moderated spread per kind: d₀ (null = infinite) and s₀. */
  priors: { group: ParameterGroup; parameters: number; priorDf: number | null; priorSd: number | null }[];
  parameters: JudgedParameter[];
  units: UnitJudgement[];
}

export function fleetRule(alpha = FLEET_ALPHA): string {
  const pct = `${+(alpha * 100).toFixed(2)} %`;
  return (
    `Each unit is judged against the other units, parameter by parameter: centre and spread of the others after setting aside values more than ${SCREEN} robust σ from their median, ` +
    `the spread pooled with the fleet's other parameters of the same group — lengths, twists, zero offsets … (empirical Bayes), and a Student-t prediction limit that accounts for how many units there are. ` +
    `A parameter is out of line when its chance under the fleet's own spread is below ${pct} ÷ K, K being the number of the unit's judged parameters (Bonferroni), ` +
    `so a unit like the others is flagged with a chance of at most ${pct}. The base frame is never judged (it is where the tracker stood); the tool point only when the model's tool is a fixed fixture.`
  );
}

function median(sorted: number[]): number {
  const n = sorted.length;
  return n % 2 ? sorted[(n - 1) / 2]! : 0.5 * (sorted[n / 2 - 1]! + sorted[n / 2]!);
}

/** Values within SCREEN robust σ of their median (all of them when the MAD is 0). */
export function screened(values: number[], limit = SCREEN): { kept: number[]; median: number; robustSd: number } {
  const s = [...values].sort((a, b) => a - b);
  const med = median(s);
  const mad = median(s.map((v) => Math.abs(v - med)).sort((a, b) => a - b));
  const robustSd = 1.4826 * mad;
  const kept = robustSd > 0 ? values.filter((v) => Math.abs(v - med) <= limit * robustSd) : values;
  return { kept, median: med, robustSd };
}

/**
 * The screened reference of one parameter for every unit in turn — `screened(values without unit i's value)`
 * and the mean and sample variance of what is kept — without sorting the others again for each unit: with
 * the values sorted once, the others' median is an index, their MAD the k-th smallest absolute deviation of
 * a sorted list with one element left out (the k nearest values form a window; its position is found by
 * bisection), the kept values a contiguous range, and their sums come from prefix sums (shifted by the
 * fleet's median so the variance does not cancel). Median, MAD and the screening are exactly those of
 * `screened`; mean and variance agree with summing the kept values to rounding (relative 1e-15).
 */
export class LeaveOneOut {
  private readonly sorted: Float64Array;
  private readonly p1: Float64Array;
  private readonly p2: Float64Array;
  private readonly shift: number;
  constructor(values: readonly number[], private readonly limit = SCREEN) {
    this.sorted = Float64Array.from(values).sort();
    const n = this.sorted.length;
    this.shift = n ? this.sorted[n >> 1]! : 0;
    this.p1 = new Float64Array(n + 1);
    this.p2 = new Float64Array(n + 1);
    for (let j = 0; j < n; j++) {
      const d = this.sorted[j]! - this.shift;
      this.p1[j + 1] = this.p1[j]! + d;
      this.p2[j + 1] = this.p2[j]! + d * d;
    }
  }

  /** Reference without one occurrence of x (x must be one of the values); null when fewer than `minKept` are kept. */
  without(x: number, minKept: number): { m: number; mean: number; variance: number } | null {
    const S = this.sorted;
    const n = S.length;
    // Position of one occurrence of x.
    let lo = 0, hi = n - 1;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (S[mid]! < x) lo = mid + 1;
      else hi = mid;
    }
    const r = lo;
    const m = n - 1;
    if (m < 1) return null;
    const o = (j: number) => S[j < r ? j : j + 1]!;
    const med = m % 2 ? o((m - 1) / 2) : 0.5 * (o(m / 2 - 1) + o(m / 2));
    // k-th smallest |o(j) − med| (1-based): min over windows [L, L+k−1] of max(med − o(L), o(L+k−1) − med).
    const kth = (k: number) => {
      let a = 0, b = m - k + 1;
      while (a < b) {
        const L = (a + b) >> 1;
        if (o(L + k - 1) - med >= med - o(L)) b = L;
        else a = L + 1;
      }
      const right = a <= m - k ? o(a + k - 1) - med : Infinity;
      const left = a > 0 ? med - o(a - 1) : Infinity;
      return Math.min(right, left);
    };
    const mad = m % 2 ? kth((m + 1) / 2) : 0.5 * (kth(m / 2) + kth(m / 2 + 1));
    const robustSd = 1.4826 * mad;
    let first = 0, last = m - 1;
    if (robustSd > 0) {
      const lim = this.limit * robustSd;
      let a = 0, b = m;
      while (a < b) {
        const j = (a + b) >> 1;
        const v = o(j);
        if (v >= med || Math.abs(v - med) <= lim) b = j;
        else a = j + 1;
      }
      first = a;
      a = first;
      b = m;
      while (a < b) {
        const j = (a + b) >> 1;
        const v = o(j);
        if (v <= med || Math.abs(v - med) <= lim) a = j + 1;
        else b = j;
      }
      last = a - 1;
    }
    const count = last - first + 1;
    if (count < minKept) return null;
    const low = o(first), high = o(last);
    if (low === high) return { m: count, mean: low, variance: 0 };
    const sFirst = first < r ? first : first + 1;
    const sLast = last < r ? last : last + 1;
    let s1 = this.p1[sLast + 1]! - this.p1[sFirst]!;
    let s2 = this.p2[sLast + 1]! - this.p2[sFirst]!;
    if (r >= sFirst && r <= sLast) {
      const d = S[r]! - this.shift;
      s1 -= d;
      s2 -= d * d;
    }
    const variance = count > 1 ? Math.max(0, (s2 - (s1 * s1) / count) / (count - 1)) : 0;
    return { m: count, mean: this.shift + s1 / count, variance };
  }
}

function meanVar(v: number[]): { mean: number; variance: number } {
  const m = v.reduce((a, b) => a + b, 0) / v.length;
  const variance = v.length > 1 ? v.reduce((a, b) => a + (b - m) * (b - m), 0) / (v.length - 1) : 0;
  return { mean: m, variance };
}

/** Smyth's moment estimate of the prior (d₀, s₀²) from sample variances s² with d degrees of freedom (d₀ capped, see below). */
export function variancePrior(items: { variance: number; df: number }[]): { d0: number; s02: number } | null {
  const ok = items.filter((x) => x.variance > 0 && x.df >= 1);
  if (ok.length < 3) return null;
  const e = ok.map((x) => Math.log(x.variance) - digamma(x.df / 2) + Math.log(x.df / 2));
  const eMean = e.reduce((a, b) => a + b, 0) / e.length;
  const eVar = e.reduce((a, b) => a + (b - eMean) ** 2, 0) / (e.length - 1) - ok.reduce((a, x) => a + trigamma(x.df / 2), 0) / ok.length;
  // The prior cannot carry more information than the variances it was estimated from: d₀ is capped at
  // their total degrees of freedom (a small fleet's pooled spread is itself uncertain).
  const pooledDf = ok.reduce((a, x) => a + x.df, 0);
  const d0 = eVar > 0 ? Math.min(2 * inverseTrigamma(eVar), pooledDf) : pooledDf;
  return { d0, s02: Math.exp(eMean + digamma(d0 / 2) - Math.log(d0 / 2)) };
}

/** The z with P(|Z| > z) = p. */
export function normalEquivalent(p: number): number {
  if (!(p > 0)) return 40;
  if (p >= 1) return 0;
  let lo = 0, hi = 40;
  for (let i = 0; i < 200; i++) {
    const mid = 0.5 * (lo + hi);
    if (2 * normalUpperTail(mid) > p) lo = mid;
    else hi = mid;
    if (hi - lo < 1e-10) break;
  }
  return 0.5 * (lo + hi);
}

export function judgeFleet(input: FleetJudgementInput): FleetJudgement {
  const alpha = input.alpha ?? FLEET_ALPHA;
  const units = input.units;
  const parameters: JudgedParameter[] = input.parameters.map((p) => {
    const values = units.map((u) => u.deviations[p.key]).filter((v): v is number => v !== undefined && Number.isFinite(v));
    const base: JudgedParameter = { ...p, judged: false, n: values.length, median: null, robustSd: null, mean: null, sd: null };
    if (values.length) {
      const mv = meanVar(values);
      const sc = screened(values);
      Object.assign(base, { mean: mv.mean, sd: values.length > 1 ? Math.sqrt(mv.variance) : null, median: sc.median, robustSd: sc.robustSd });
    }
    if (p.group === 'base') return { ...base, reason: 'the base frame is where the tracker stood, not a property of the arm' };
    if (p.group === 'tool' && !input.judgeTool) return { ...base, reason: "the model's tool is not a fixed fixture (the target is mounted anew each visit)" };
    if (values.length < MIN_UNITS) return { ...base, reason: `fewer than ${MIN_UNITS} units have a current set` };
    const lo = Math.min(...values), hi = Math.max(...values);
    if (!(hi - lo > 1e-9)) return { ...base, reason: 'the same in every unit (fixed at nominal in the fits)' };
    return { ...base, judged: true };
  });
  const judged = parameters.filter((p) => p.judged);

  // Prior of the spread per kind, reported for the whole fleet (each unit's own judgement uses the prior of
  // the OTHER units, below, so an odd unit cannot widen its own limits).
  const valuesOf = (key: string, skip: number) =>
    units.filter((_, j) => j !== skip).map((o) => o.deviations[key]).filter((v): v is number => v !== undefined && Number.isFinite(v));
  const kinds = [...new Set(judged.map((p) => p.group))];
  const priorFrom = (refs: Map<string, number[]>, kind: ParameterGroup, leaveOut?: string) =>
    variancePrior(judged.filter((p) => p.group === kind && p.key !== leaveOut && refs.has(p.key)).map((p) => ({ variance: meanVar(refs.get(p.key)!).variance, df: refs.get(p.key)!.length - 1 })));
  const fleetRefs = new Map(judged.map((p) => [p.key, screened(valuesOf(p.key, -1)).kept]));
  const priors: FleetJudgement['priors'] = kinds
    .map((kind) => ({ kind, count: judged.filter((p) => p.group === kind).length }))
    .filter((k) => k.count > 0)
    .map(({ kind, count }) => {
      const prior = priorFrom(fleetRefs, kind);
      return { group: kind, parameters: count, priorDf: prior ? (Number.isFinite(prior.d0) ? prior.d0 : null) : 0, priorSd: prior ? Math.sqrt(prior.s02) : null };
    });

  // The prior a parameter is judged with comes from the OTHER parameters of its group, so an odd value
  // cannot widen its own limits through the prior.
  const priorOf = new Map(judged.map((p) => [p.key, priorFrom(fleetRefs, p.group, p.key)]));
  // Each unit's reference is the other units' values of the parameter, screened (see LeaveOneOut).
  const leaveOneOut = new Map(judged.map((p) => [p.key, new LeaveOneOut(valuesOf(p.key, -1))]));
  const out: UnitJudgement[] = units.map((u, i) => {
    const mine = judged.filter((p) => u.deviations[p.key] !== undefined && Number.isFinite(u.deviations[p.key]));
    const K = mine.length;
    const level = K ? alpha / K : alpha;
    const criticalScore = normalEquivalent(level);
    const result: UnitJudgement = { id: u.id, judgedCount: K, criticalScore, flagged: false, flags: [], parameters: {} };
    for (const p of mine) {
      const x = u.deviations[p.key]!;
      const ref = leaveOneOut.get(p.key)!.without(x, MIN_UNITS - 1);
      if (!ref) continue;
      const { m, mean, variance } = ref;
      const prior = priorOf.get(p.key) ?? null;
      let s2: number, nu: number;
      if (!prior) {
        s2 = variance;
        nu = m - 1;
      } else if (!Number.isFinite(prior.d0)) {
        s2 = prior.s02;
        nu = Infinity;
      } else {
        s2 = (prior.d0 * prior.s02 + (m - 1) * variance) / (prior.d0 + m - 1);
        nu = prior.d0 + m - 1;
      }
      const scale = Math.sqrt(s2 * (1 + 1 / m));
      if (!(scale > 0)) continue;
      const t = (x - mean) / scale;
      const pv = studentTwoSidedP(t, nu);
      const tCrit = studentTwoSidedCritical(level, nu);
      const flagged = pv < level;
      result.parameters[p.key] = {
        score: Math.sign(t) * normalEquivalent(pv),
        p: pv,
        centre: mean,
        lower: mean - tCrit * scale,
        upper: mean + tCrit * scale,
        df: Number.isFinite(nu) ? nu : null,
        flagged,
      };
      if (flagged) result.flags.push(p.key);
    }
    result.flagged = result.flags.length > 0;
    return result;
  });
  return { alpha, rule: fleetRule(alpha), priors, parameters, units: out };
}
