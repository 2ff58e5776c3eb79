/**
 * The plausibility rules on real sessions: the Orrin R6-620 test session against its own model (passes) and
 * against a different six-axis model, and the same session damaged the ways files get damaged.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { fitSession } from '../../src/lib/engine/fit';
import { DEFAULT_JUDGEMENT, fitVerdicts, nominalErrorLimit, sessionVerdicts } from '../../src/lib/engine/plausibility';
import { parseSessionCsv } from '../../src/lib/engine/session-csv';
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';

const r6 = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
// Another six-axis model (the demo's invented R6-560): same joint count, longer links.
const other: ArmGeometry = {
  ...r6,
  name: 'other',
  joints: r6.joints.map((j, k) => ({ ...j, a: [0, 75, 560, 35, 0, 0][k]!, d: [420, 0, 0, 515, 0, 90][k]!, min: (j.min ?? -180) - 10, max: (j.max ?? 180) + 10 })),
  tool: { x: 0, y: 0, z: 125, rx: 0, ry: 0, rz: 0 },
};

async function poses(): Promise<SessionPose[]> {
  const parsed = await parseSessionCsv(readFileSync('test-data/orrin-r6-620-session.csv', 'utf8'), { fileName: 'orrin-r6-620-session.csv', geometry: r6 });
  if (!parsed.ok) throw new Error('test session does not parse');
  return parsed.poses;
}

describe('plausibility', () => {
  it('passes the session of the right model, at the defaults (5 mm, 1°, 0.05 mm)', async () => {
    const p = await poses();
    const report = fitSession(r6, p, { holdout: 0.2 });
    const v = fitVerdicts(report, p);
    expect(v.level).toBe('pass');
    expect(v.verdicts.map((x) => x.rule).sort()).toEqual(['joint-readings', 'nominal-error', 'parameter-changes', 'residual-noise']);
    expect(sessionVerdicts(r6, p).level).toBe('pass');
  });

  it('calls a session of a different arm implausible, before and after the fit, with reasons', async () => {
    const p = await poses();
    const pre = sessionVerdicts(other, p);
    expect(pre.level).toBe('implausible');
    const nominal = pre.verdicts.find((x) => x.rule === 'nominal-error')!;
    expect(nominal.measured!).toBeGreaterThan(nominalErrorLimit(other, DEFAULT_JUDGEMENT));
    expect(nominal.reason).toMatch(/different arm/);
    const report = fitSession(other, p, { holdout: 0.2 });
    const v = fitVerdicts(report, p);
    expect(v.level).toBe('implausible');
    const changes = v.verdicts.find((x) => x.rule === 'parameter-changes')!;
    expect(changes.level).toBe('implausible');
    expect(changes.reason).toMatch(/J3\.a -9\d\.\d{3} mm/);
    // Wider bounds an engineer set for a rebuilt arm: the change rule passes.
    const loose = fitVerdicts(report, p, { ...DEFAULT_JUDGEMENT, lengthBoundMm: 100, angleBoundDeg: 10 });
    expect(loose.verdicts.find((x) => x.rule === 'parameter-changes')!.level).toBe('pass');
  });

  it('names radians, a shifted joint order and metres', async () => {
    const p = await poses();
    const rad = p.map((x) => ({ ...x, q: x.q.map((v) => (v * Math.PI) / 180) }));
    const r = sessionVerdicts(r6, rad);
    expect(r.verdicts.find((x) => x.rule === 'joint-readings')).toMatchObject({ level: 'implausible', title: 'Joint readings look like radians' });
    expect(r.verdicts.find((x) => x.rule === 'nominal-error')!.reason).toMatch(/radians/);
    const shifted = p.map((x) => ({ ...x, q: x.q.map((_, k) => x.q[(k + 1) % 6]!) }));
    const s = sessionVerdicts(r6, shifted);
    expect(s.verdicts.find((x) => x.rule === 'joint-readings')).toMatchObject({ level: 'implausible', title: 'Joint order looks shifted' });
    expect(s.verdicts.find((x) => x.rule === 'nominal-error')!.reason).toMatch(/q1 holds joint 2/);
    const metres = p.map((x) => ({ ...x, x: x.x / 1000, y: x.y / 1000, z: x.z / 1000 }));
    expect(sessionVerdicts(r6, metres).verdicts.find((x) => x.rule === 'nominal-error')!.reason).toMatch(/metres/);
  });

  it('judges the residual spread against the stated instrument noise', async () => {
    const p = await poses();
    const report = fitSession(r6, p, { holdout: 0.2 });
    const noisy = (noise: number) => fitVerdicts(report, p, { ...DEFAULT_JUDGEMENT, instrumentNoiseMm: noise }).verdicts.find((x) => x.rule === 'residual-noise')!.level;
    // The session's residual σ is about 0.02 mm: 0.4× of 0.05 mm; 10× of 0.002 mm; 40× of 0.0005 mm.
    expect(noisy(0.05)).toBe('pass');
    expect(noisy(0.002)).toBe('caution');
    expect(noisy(0.0005)).toBe('implausible');
  });
});
