import type { z } from 'zod';

/** JSON response with an explicit status. */
export function json(body: unknown, status = 200, headers: Record<string, string> = {}) {
  return new Response(JSON.stringify(body), {
    status,
    headers: { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store', ...headers },
  });
}

export interface FieldProblem {
  line?: number;
  column?: string;
  field?: string;
  message: string;
  expected?: string;
}

/** 4xx with the list of problems: { error, errors: [...] }. */
export function problems(status: number, error: string, errors: FieldProblem[] = []) {
  return json({ error, errors }, status);
}

/** zod issues as field problems (field = the dotted path). */
export function zodProblems(err: z.ZodError, prefix = ''): FieldProblem[] {
  return err.issues.map((i) => ({ field: prefix + i.path.map(String).join('.') || undefined, message: i.message }));
}

/** Read a JSON body with a size cap; undefined when it is not valid JSON. */
export async function readJson(request: Request, maxBytes = 1024 * 1024): Promise<{ ok: true; value: unknown } | { ok: false; response: Response }> {
  const length = Number(request.headers.get('content-length') ?? 0);
  if (length > maxBytes) return { ok: false, response: problems(413, `Request body over ${maxBytes} bytes.`) };
  const text = await request.text();
  if (text.length > maxBytes) return { ok: false, response: problems(413, `Request body over ${maxBytes} bytes.`) };
  if (!text.trim()) return { ok: true, value: {} };
  try {
    return { ok: true, value: JSON.parse(text) };
  } catch (e) {
    return { ok: false, response: problems(400, 'The request body is not valid JSON.', [{ message: (e as Error).message }]) };
  }
}

/** Errors that mean "PostgreSQL (or another backing service) is away right now", answered with 503. */
export function isServiceUnavailable(err: unknown): boolean {
  const e = err as { code?: string; errno?: string; cause?: unknown } | undefined;
  if (!e) return false;
  const codes = ['ECONNREFUSED', 'ECONNRESET', 'CONNECT_TIMEOUT', 'CONNECTION_CLOSED', 'CONNECTION_ENDED', 'CONNECTION_DESTROYED', 'ETIMEDOUT', 'EPIPE', '57P01', '57P02', '57P03', '08006', '08001', '08003', '08004'];
  if (e.code && codes.includes(e.code)) return true;
  return e.cause ? isServiceUnavailable(e.cause) : false;
}

export function isUuid(s: string | undefined): s is string {
  return !!s && /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/i.test(s);
}
