import { describe, expect, it } from 'vitest';
import { scaleNominal, scaleSessionCsv } from '../../scripts/scale-fixture';
import { fitSession } from '../../src/lib/engine/fit';
import { parseSessionCsv } from '../../src/lib/engine/session-csv';
import type { SessionPose } from '../../src/lib/engine/types';
import { packable, packPoses, packResiduals, unpackPoses, unpackResiduals } from '../../src/lib/server/pose-transfer';

describe('poses packed in columns for the engine thread', () => {
  it('come back exactly, with labels, lines and splits', () => {
    const poses: SessionPose[] = [
      { label: 'A', line: 2, q: [0.1, -20, 30.000000000000004, 0, 1e-300, -179.9], x: 1.5, y: -2.25, z: 1e6 / 3, split: 'fit' },
      { label: 'A', line: 3, q: [1, 2, 3, 4, 5, 6], x: 0, y: NaN, z: -0.5 },
      { label: 'tab\tlabel ✓', line: 9, q: [6, 5, 4, 3, 2, 1], x: 7, y: 8, z: 9, split: 'validate' },
    ];
    expect(packable(poses)).toBe(true);
    expect(unpackPoses(structuredClone(packPoses(poses)))).toEqual(poses);
    expect(packable([...poses, { label: 'short', line: 10, q: [1, 2], x: 0, y: 0, z: 0 }])).toBe(false);
  });

  it('give the same fit, and the report poses survive packing', async () => {
    const parsed = await parseSessionCsv(scaleSessionCsv(300), { geometry: scaleNominal(), fileName: 'p.csv' });
    if (!parsed.ok) throw new Error(`the fixture did not parse: ${JSON.stringify(parsed.problems.slice(0, 3))}`);
    const poses = parsed.poses;
    const direct = fitSession(scaleNominal(), poses, {});
    const viaColumns = fitSession(scaleNominal(), unpackPoses(structuredClone(packPoses(poses))), {});
    expect(viaColumns.calibrated).toEqual(direct.calibrated);
    expect(unpackResiduals(structuredClone(packResiduals(direct.poses)))).toEqual(direct.poses);
    // A pose without a standardised residual (null) stays null, not NaN or 0.
    const withNull = direct.poses.map((p, i) => (i === 0 ? { ...p, standardised: null } : p));
    expect(unpackResiduals(packResiduals(withNull))[0]!.standardised).toBeNull();
  });
});
