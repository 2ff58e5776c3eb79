/**
 * Special functions and Student's t distribution for the fleet statistics (pure, no dependencies).
 *
 * - Regularised incomplete beta I_x(a, b) by Lentz's continued fraction (Numerical Recipes, 3rd ed., §6.4).
 * - log Γ by the Lanczos approximation (g = 7, n = 9; the coefficients published with it, from memory of
 *   the widely used table).
 * - Student's t: P(T ≤ t) = 1 − ½ I_{ν/(ν+t²)}(ν/2, ½) for t ≥ 0; ν = ∞ is the standard normal.
 * - digamma / trigamma: recurrence to x ≥ 6, then the asymptotic series (Abramowitz & Stegun 6.3.18, 6.4.12).
 * - inverse trigamma: Smyth's Newton iteration (Smyth 2004, "Linear models and empirical Bayes methods for
 *   assessing differential expression", appendix).
 * tests/engine/distributions.test.ts checks them against SciPy.
 */

const LANCZOS = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];

export function logGamma(x: number): number {
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - logGamma(1 - x);
  x -= 1;
  let a = LANCZOS[0]!;
  const t = x + 7.5;
  for (let i = 1; i < 9; i++) a += LANCZOS[i]! / (x + i);
  return 0.5 * Math.log(2 * Math.PI) + (x + 0.5) * Math.log(t) - t + Math.log(a);
}

function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  let c = 1, d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 500; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d; if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c; if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d; h *= d * c;
    aa = (-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d; if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c; if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return h;
}

/** Regularised incomplete beta function I_x(a, b). */
export function incompleteBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const lbt = logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log(1 - x);
  const bt = Math.exp(lbt);
  if (x < (a + 1) / (a + b + 2)) return (bt * betaContinuedFraction(a, b, x)) / a;
  return 1 - (bt * betaContinuedFraction(b, a, 1 - x)) / b;
}

/** Standard normal upper tail P(Z > z), by erfc (W. J. Cody's rational form via a continued fraction is overkill here). */
export function normalUpperTail(z: number): number {
  // P(Z > z) = ½ erfc(z/√2); erfc by the complementary incomplete gamma Q(½, z²/2) continued fraction.
  if (z < 0) return 1 - normalUpperTail(-z);
  const x = (z * z) / 2;
  if (x < 1.5) {
    // Series of the lower incomplete gamma P(½, x).
    let sum = 1 / 0.5, term = 1 / 0.5;
    for (let n = 1; n < 200; n++) {
      term *= x / (0.5 + n);
      sum += term;
      if (term < sum * 1e-16) break;
    }
    const p = sum * Math.exp(-x + 0.5 * Math.log(x) - logGamma(0.5));
    return 0.5 * (1 - p);
  }
  // Continued fraction of Q(½, x) (Numerical Recipes §6.2).
  const tiny = 1e-300;
  let b = x + 1 - 0.5, c = 1 / tiny, d = 1 / b, h = d;
  for (let i = 1; i < 300; i++) {
    const an = -i * (i - 0.5);
    b += 2;
    d = an * d + b; if (Math.abs(d) < tiny) d = tiny;
    c = b + an / c; if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return 0.5 * Math.exp(-x + 0.5 * Math.log(x) - logGamma(0.5)) * h;
}

/** P(|T| > |t|) for Student's t with ν degrees of freedom (ν = Infinity: normal). */
export function studentTwoSidedP(t: number, nu: number): number {
  if (!Number.isFinite(t)) return 0;
  if (!Number.isFinite(nu) || nu > 1e7) return 2 * normalUpperTail(Math.abs(t));
  return incompleteBeta(nu / (nu + t * t), nu / 2, 0.5);
}

/** The t with P(|T| > t) = p (two-sided critical value), by bisection on the monotone tail. */
export function studentTwoSidedCritical(p: number, nu: number): number {
  let lo = 0, hi = 1;
  while (studentTwoSidedP(hi, nu) > p) hi *= 2;
  for (let i = 0; i < 200; i++) {
    const mid = 0.5 * (lo + hi);
    if (studentTwoSidedP(mid, nu) > p) lo = mid;
    else hi = mid;
    if (hi - lo < 1e-12 * hi) break;
  }
  return 0.5 * (lo + hi);
}

export function digamma(x: number): number {
  let r = 0;
  while (x < 6) {
    r -= 1 / x;
    x += 1;
  }
  const f = 1 / (x * x);
  return r + Math.log(x) - 0.5 / x - f * (1 / 12 - f * (1 / 120 - f * (1 / 252 - f * (1 / 240 - f / 132))));
}

export function trigamma(x: number): number {
  let r = 0;
  while (x < 6) {
    r += 1 / (x * x);
    x += 1;
  }
  const f = 1 / (x * x);
  return r + 1 / x + f / 2 + (f / x) * (1 / 6 - f * (1 / 30 - f * (1 / 42 - f / 30)));
}

/** ψ''(x), recurrence to x ≥ 6, then the asymptotic series (Abramowitz & Stegun 6.4.12). */
export function tetragamma(x: number): number {
  let r = 0;
  while (x < 6) {
    r -= 2 / (x * x * x);
    x += 1;
  }
  const f = 1 / (x * x);
  return r - f - f / x - (f * f) / 2 + (f * f * f) / 6 - (f * f * f * f) / 6 + (3 * f * f * f * f * f) / 10 - (5 * f * f * f * f * f * f) / 6;
}

/** y with trigamma(y) = x (x > 0), Smyth's Newton iteration (Smyth 2004, appendix). */
export function inverseTrigamma(x: number): number {
  if (x > 1e7) return 1 / Math.sqrt(x);
  if (x < 1e-6) return 1 / x;
  let y = 0.5 + 1 / x;
  for (let i = 0; i < 50; i++) {
    const tri = trigamma(y);
    const dif = (tri * (1 - tri / x)) / tetragamma(y);
    y += dif;
    if (-dif / y < 1e-8) break;
  }
  return y;
}
