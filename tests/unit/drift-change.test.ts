/** Drift changes: angles wrapped at ±180°, each change against its combined standard error. */
import { describe, expect, it } from 'vitest';
import { combinedStandardError, compareGeometries, crossedWords, DEFAULT_TOLERANCES, parameterDifference } from '../../src/lib/server/drift';
import type { ArmGeometry } from '../../src/lib/engine/types';

const arm = (theta: number, a = 100): ArmGeometry => ({
  format: 'offsetry-arm/1', name: 't', convention: 'dh',
  joints: [{ name: 'J1', type: 'revolute', a, alpha: 0, d: 0, theta }],
});

describe('drift changes', () => {
  it('wraps angle differences into (−180°, 180°] and leaves lengths alone', () => {
    expect(parameterDifference(179.9, -179.9, 'deg')).toBeCloseTo(0.2, 10);
    expect(parameterDifference(-179.9, 179.9, 'deg')).toBeCloseTo(-0.2, 10);
    expect(parameterDifference(0, 180, 'deg')).toBe(180);
    expect(parameterDifference(10, 370.5, 'deg')).toBeCloseTo(0.5, 10);
    expect(parameterDifference(179.9, -179.9, 'mm')).toBeCloseTo(-359.8, 10);
  });

  it('states each change as a multiple of its combined standard error and says which limit it crossed', () => {
    // √(0.003² + 0.004²) = 0.005 (the 3-4-5 triangle).
    expect(combinedStandardError(0.003, 0.004)).toBeCloseTo(0.005, 12);
    expect(combinedStandardError(null, undefined)).toBeNull();
    const c = compareGeometries(arm(179.99), arm(-179.98), DEFAULT_TOLERANCES, { before: { 'J1.theta': 0.003 }, after: { 'J1.theta': 0.004 } });
    const t = c.find((x) => x.key === 'J1.theta')!;
    expect(t.change).toBeCloseTo(0.03, 10);
    expect(t.multiple).toBeCloseTo(6, 8);
    // 0.03° > tolerance 0.02° and > 3 SE.
    expect(t).toMatchObject({ exceeded: true, beyondSe: true });
    expect(crossedWords(t)).toMatch(/beyond the tolerance and beyond 3 combined SE/);
    const noisy = compareGeometries(arm(0), arm(0.03), DEFAULT_TOLERANCES, { before: { 'J1.theta': 0.02 }, after: { 'J1.theta': 0.02 } }).find((x) => x.key === 'J1.theta')!;
    expect(noisy).toMatchObject({ exceeded: true, beyondSe: false });
    expect(crossedWords(noisy)).toMatch(/within 3 combined SE/);
  });
});
