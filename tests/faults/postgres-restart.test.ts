/**
 * PostgreSQL stopped and started under traffic, through the harness: while it is away the app answers
 * 503 JSON quickly (no hang, no 500, no HTML error page), and afterwards the same app process — not
 * restarted — answers 200 again on its existing connection pool.
 */
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { BASE_URL, Client, DEMO, signedIn } from '../support/http';
import { harnessStatus, startPostgres, stopPostgres } from '../support/services';
import { sleep, waitUntil } from '../support/wait';

interface Answer {
  path: string;
  status: number;
  json: boolean;
  body: string;
  ms: number;
}

let cookie: Client;
let bearer: Client;
let mainPid: number | undefined;

beforeAll(async () => {
  cookie = await signedIn(DEMO.engineer);
  const token = await cookie.json('/api/tokens', { method: 'POST', json: { name: 'fault test' } });
  expect(token.status).toBe(201);
  bearer = new Client(BASE_URL, token.body.token);
  mainPid = (await harnessStatus()).apps.find((a) => a.url === BASE_URL)?.pid;
  expect(mainPid).toBeDefined();
});

afterEach(async () => {
  if (!(await harnessStatus()).postgres) await startPostgres();
});

/** One request with a hard client-side cap, so a hanging server fails the test instead of stalling it. */
async function ask(client: Client, path: string): Promise<Answer> {
  const t0 = performance.now();
  try {
    const res = await client.fetch(path, { signal: AbortSignal.timeout(15_000) });
    const body = await res.text();
    return { path, status: res.status, json: /application\/json/.test(res.headers.get('content-type') ?? ''), body, ms: performance.now() - t0 };
  } catch (error) {
    return { path, status: 0, json: false, body: String(error), ms: performance.now() - t0 };
  }
}

const PATHS = ['/api/units?page=1', '/api/sessions', '/api/me', '/api/fits', '/api/arm-models'];

/** Requests in a loop on both clients until stopped; every answer is kept. */
function traffic() {
  const answers: Answer[] = [];
  let running = true;
  const loops = [cookie, bearer].map(async (client, k) => {
    let i = k;
    while (running) {
      answers.push(await ask(client, PATHS[i++ % PATHS.length]!));
      await sleep(20);
    }
  });
  return {
    answers,
    stop: async () => {
      running = false;
      await Promise.all(loops);
    },
  };
}

/** Poll until the API answers 200 again on `client`. */
const until200 = (client: Client, timeoutMs = 20_000) =>
  waitUntil('a 200 after PostgreSQL came back', () => ask(client, '/api/units?page=1'), (a) => a.status === 200, { timeoutMs, intervalMs: 200 });

describe.each(['fast', 'immediate'] as const)('PostgreSQL stopped (%s) in the middle of traffic', (mode) => {
  it('answers 503 JSON while it is away and 200 again afterwards, without an app restart', async () => {
    expect((await ask(bearer, '/api/units?page=1')).status).toBe(200);
    const load = traffic();
    await sleep(500);
    await stopPostgres(mode);

    // Deliberate requests during the outage, on both kinds of sign-in and on a page.
    const during: Answer[] = [];
    for (const path of PATHS) {
      during.push(await ask(cookie, path));
      during.push(await ask(bearer, path));
    }
    const page = await ask(cookie, '/units');
    for (const a of during) {
      expect(a.status, `${a.path}: ${a.body}`).toBe(503);
      expect(a.json, a.path).toBe(true);
      expect(JSON.parse(a.body).error).toMatch(/unavailable/i);
      expect(a.ms, `${a.path} took ${a.ms} ms`).toBeLessThan(6000);
    }
    expect(page.status, page.body.slice(0, 200)).toBe(503);
    expect(page.ms).toBeLessThan(6000);

    await startPostgres();
    await until200(cookie);
    await until200(bearer);
    await load.stop();

    // Everything the background traffic saw: 200 or a clean 503, never a 500, an HTML error or a timeout.
    const statuses = new Map<number, number>();
    for (const a of load.answers) statuses.set(a.status, (statuses.get(a.status) ?? 0) + 1);
    const bad = load.answers.filter((a) => !(a.status === 200 || (a.status === 503 && a.json)));
    expect(bad.map((a) => `${a.status} ${a.path} ${a.body.slice(0, 120)}`), JSON.stringify([...statuses])).toEqual([]);
    expect(statuses.get(200) ?? 0).toBeGreaterThan(0);
    expect(load.answers.every((a) => a.ms < 10_000)).toBe(true);

    // The same process served before, during and after.
    expect((await harnessStatus()).apps.find((a) => a.url === BASE_URL)?.pid).toBe(mainPid);
    for (const path of PATHS) expect((await ask(bearer, path)).status, path).toBe(200);
  });
});
