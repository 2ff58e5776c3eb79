/**
 * Heavy work off the request thread: while a 500-pose plan is being made, the same app instance keeps
 * answering GET /api/health. Before, the plan ran on the server's only thread and health waited for it.
 * The check is relative (health answers arrive before the plan does), not a speed target.
 */
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, units } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { BASE_URL, DEMO, signedIn, uniq, type Client } from '../support/http';
import { requireEnv } from '../support/services';
import { sleep } from '../support/wait';

const db = createDb(requireEnv('DATABASE_URL'), { max: 2 });
const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
let engineer: Client;
let serial: string;

beforeAll(async () => {
  engineer = await signedIn(DEMO.engineer);
  const [model] = await db.insert(armModels).values({ name: uniq('PLAN-R6-'), description: 'offload tests' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  serial = uniq('PLAN-');
  await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Plan hall', cell: 'P1' });
});
afterAll(async () => {
  await db.$client.end();
});

describe('heavy work runs off the request thread', () => {
  it('GET /api/health answers while a 500-pose plan is being made', async () => {
    // Warm the engine thread (its first start loads the engine) with a small plan.
    expect((await engineer.json(`/api/units/${serial}/pose-plan?count=30&seed=2`)).status).toBe(200);
    const t0 = performance.now();
    let planDone = 0;
    const plan = engineer.json(`/api/units/${serial}/pose-plan?count=500&seed=3`).then((r) => {
      planDone = performance.now() - t0;
      return r;
    });
    const healthAt: number[] = [];
    await sleep(150);
    while (!planDone && healthAt.length < 50) {
      const res = await fetch(new URL('/api/health', BASE_URL));
      expect(res.status).toBe(200);
      await res.arrayBuffer();
      if (!planDone) healthAt.push(performance.now() - t0);
      await sleep(50);
    }
    const res = await plan;
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(200);
    expect(res.body.poses).toHaveLength(500);
    // A figure for the report, not an assertion on speed.
    console.info(`500-pose plan: ${Math.round(planDone)} ms; ${healthAt.length} health answers arrived meanwhile`);
    // On the request thread no health answer could arrive before the plan's; now several do.
    expect(healthAt.length).toBeGreaterThanOrEqual(3);
  }, 120_000);
});
