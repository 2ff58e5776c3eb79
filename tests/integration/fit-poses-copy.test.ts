/**
 * A fit's per-pose results are stored with COPY … FROM STDIN (src/lib/server/fit-poses.ts): every value comes
 * back exactly as written (labels with the characters COPY's text format escapes, full float precision, null
 * standardised residuals), and a transaction that fails after the COPY leaves no rows.
 */
import { asc, eq } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { fitPoses, fits } from '../../src/db/schema';
import type { PoseResidual } from '../../src/lib/engine/fit-report';
import { insertFitPoses } from '../../src/lib/server/fit-poses';
import { createFixture, testDb } from './fit-fixtures';

const db = testDb();
afterAll(async () => {
  await db.$client.end();
});

const labels = ['P\\001', 'tab\there', 'two\nlines', 'cr\rhere', 'quote"\'s', 'ünïcødé ✓', '\\N', ''];
function poses(): PoseResidual[] {
  return labels.map((label, i) => ({
    label,
    line: i + 2,
    role: i % 3 === 0 ? 'holdout' : 'fit',
    before: [0.1 + i / 3, -Math.PI * i, 1e-17 * (i + 1)],
    after: [2.2250738585072014e-308, 0, 123456.78901234567],
    errorBefore: Math.SQRT2 * (i + 1),
    errorAfter: 0.1 + 0.2 * i,
    standardised: i % 2 ? null : -1.2345678901234567 * i,
    outlier: i === 4,
  }));
}

async function newFit() {
  const fx = await createFixture({ count: 3 });
  const [fit] = await db.insert(fits).values({ sessionId: fx.sessionId, unitId: fx.unitId, state: 'running', settings: {}, startedAt: new Date() }).returning({ id: fits.id });
  return fit!.id;
}

describe('storing a fit’s poses with COPY', () => {
  it('reads back every value exactly, in a transaction', async () => {
    const fitId = await newFit();
    const written = poses();
    await db.transaction((tx) => insertFitPoses(tx, fitId, written));
    const rows = await db.select().from(fitPoses).where(eq(fitPoses.fitId, fitId)).orderBy(asc(fitPoses.idx));
    expect(rows).toHaveLength(written.length);
    rows.forEach((r, i) => {
      const w = written[i]!;
      expect(r.idx).toBe(i);
      expect(r.label).toBe(w.label);
      expect(r.line).toBe(w.line);
      expect(r.role).toBe(w.role);
      expect([r.beforeX, r.beforeY, r.beforeZ]).toEqual(w.before);
      expect([r.afterX, r.afterY, r.afterZ]).toEqual(w.after);
      expect(r.errorBefore).toBe(w.errorBefore);
      expect(r.errorAfter).toBe(w.errorAfter);
      expect(r.standardised).toBe(w.standardised);
      expect(r.outlier).toBe(w.outlier);
    });
  });

  it('leaves nothing when the transaction fails afterwards', async () => {
    const fitId = await newFit();
    await expect(
      db.transaction(async (tx) => {
        await insertFitPoses(tx, fitId, poses());
        throw new Error('store failed after the poses');
      }),
    ).rejects.toThrow('store failed after the poses');
    expect(await db.select().from(fitPoses).where(eq(fitPoses.fitId, fitId))).toHaveLength(0);
  });

  it('streams many poses in one statement', async () => {
    const fitId = await newFit();
    const many = Array.from({ length: 25_000 }, (_, i) => ({ ...poses()[i % labels.length]!, line: i + 2 }));
    await insertFitPoses(db, fitId, many);
    const [{ n, last }] = await db.$client`select count(*)::int as n, max(idx)::int as last from fit_poses where fit_id = ${fitId}`;
    expect(n).toBe(25_000);
    expect(last).toBe(24_999);
  });
});
