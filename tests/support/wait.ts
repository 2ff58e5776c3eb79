/**
 * Waiting in tests: one loop for every "ask again until it is so" (a fit finishing, mail arriving, a
 * worker becoming ready, a service coming back). Every wait has a time limit; `waitUntil` fails with what
 * it waited for and the last value it saw, `poll` hands the last value back for the test to assert on.
 */

/** Resolve after `ms` milliseconds. */
export const sleep = (ms: number) => new Promise<void>((resolve) => setTimeout(resolve, ms));

export interface PollOptions {
  /** Stop asking after this many milliseconds (the probe that starts before the limit still counts). */
  timeoutMs: number;
  /** Pause between two probes, ms. Default 250. */
  intervalMs?: number;
}

/**
 * Call `probe` until `done` accepts its value or `timeoutMs` has passed. Never throws on the time limit:
 * returns the last value and whether it was accepted. A probe that throws ends the wait with its error.
 */
export async function poll<T>(
  probe: () => T | Promise<T>, done: (value: T) => boolean, options: PollOptions,
): Promise<{ value: T; done: boolean }> {
  const deadline = Date.now() + options.timeoutMs;
  for (;;) {
    const value = await probe();
    if (done(value)) return { value, done: true };
    if (Date.now() > deadline) return { value, done: false };
    await sleep(options.intervalMs ?? 250);
  }
}

/** As `poll`, but the time limit is a failure: "<what>: not reached within N ms (last: …)". */
export async function waitUntil<T>(
  what: string, probe: () => T | Promise<T>, done: (value: T) => boolean, options: PollOptions,
): Promise<T> {
  const { value, done: reached } = await poll(probe, done, options);
  if (!reached) throw new Error(`${what}: not reached within ${options.timeoutMs} ms (last: ${shortJson(value)})`);
  return value;
}

/** JSON of a value, cut to a readable length for an error message. */
function shortJson(value: unknown, max = 500): string {
  let text: string;
  try {
    text = JSON.stringify(value) ?? String(value);
  } catch {
    text = String(value);
  }
  return text.length > max ? `${text.slice(0, max)}…` : text;
}
