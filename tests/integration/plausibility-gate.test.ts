/**
 * The plausibility gate through the real API: the model's settings are editable by engineers; a fit judged
 * implausible by them cannot be submitted without an engineer's written override, which the fit then carries.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createFixture, testDb, waitForFit, type Fixture } from './fit-fixtures';
import { DEMO, signedIn, type Client } from '../support/http';

let fx: Fixture;
let engineer: Client, technician: Client;
beforeAll(async () => {
  fx = await createFixture({ count: 40, seed: 71 });
  engineer = await signedIn(DEMO.engineer);
  technician = await signedIn(DEMO.technician);
});
afterAll(() => testDb().$client.end());

describe('plausibility gate', () => {
  it('judges with the model settings, refuses submission without an engineer override, records the override', async () => {
    const defaults = await engineer.json(`/api/arm-models/${fx.modelId}/judgement`);
    expect(defaults.status).toBe(200);
    expect(defaults.body).toMatchObject({ defaults: true, settings: { lengthBoundMm: 5, angleBoundDeg: 1, instrumentNoiseMm: 0.05, toolFixture: false } });
    const bad = await engineer.json(`/api/arm-models/${fx.modelId}/judgement`, { method: 'PUT', json: { lengthBoundMm: -1, angleBoundDeg: 1, instrumentNoiseMm: 0.05, toolFixture: false } });
    expect(bad.status).toBe(400);
    expect(bad.body.errors[0].field).toBe('lengthBoundMm');
    expect((await technician.json(`/api/arm-models/${fx.modelId}/judgement`, { method: 'PUT', json: defaults.body.settings })).status).toBe(403);
    // Bounds far tighter than the fixture's true errors (tenths of a mm): every fit of it is implausible.
    const tight = await engineer.json(`/api/arm-models/${fx.modelId}/judgement`, { method: 'PUT', json: { lengthBoundMm: 0.001, angleBoundDeg: 0.0001, instrumentNoiseMm: 0.05, toolFixture: false } });
    expect(tight.status).toBe(200);
    expect(tight.body.defaults).toBe(false);

    const started = await technician.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: {} });
    const fit = (await waitForFit(technician, started.body.id)).fit;
    expect(fit.verdicts.level).toBe('implausible');
    expect(fit.verdicts.verdicts.find((v: { rule: string }) => v.rule === 'parameter-changes').level).toBe('implausible');
    // The session's pose-set check applies the same settings (nominal error against the tightened envelope).
    const check = await technician.json(`/api/sessions/${fx.sessionId}/check`);
    expect(check.body.check.verdicts.verdicts.find((v: { rule: string }) => v.rule === 'nominal-error').limit).toBeCloseTo(fit.verdicts.verdicts.find((v: { rule: string }) => v.rule === 'nominal-error').limit, 9);

    const submit = (c: Client, json: object) => c.json(`/api/fits/${fit.id}/submit`, { method: 'POST', json });
    expect((await submit(technician, { comment: 'please' })).status).toBe(409);
    expect((await submit(technician, { override: 'A technician cannot override a verdict at all.' })).status).toBe(403);
    const short = await submit(engineer, { override: 'ok' });
    expect(short.status).toBe(400);
    expect(short.body.errors[0].field).toBe('override');
    const override = 'Bounds were set for a test; the arm is known to be within 0.3 mm.';
    const ok = await submit(engineer, { comment: 'see override', override });
    expect(ok.status).toBe(200);
    const after = (await engineer.json(`/api/fits/${fit.id}`)).body.fit;
    expect(after).toMatchObject({ reviewState: 'awaiting_review', overrideNote: override, submitNote: 'see override', overrideByName: expect.any(String) });
  }, 120_000);
});
