import type { z } from 'zod';
import { MAX_JSON_DEPTH, jsonDepth } from '../shared/input';

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
  // Read chunk by chunk and stop at the cap: a chunked body (no content-length) is never buffered whole.
  const chunks: Uint8Array[] = [];
  let total = 0;
  const reader = request.body?.getReader();
  while (reader) {
    const { done, value } = await reader.read();
    if (done) break;
    total += value.byteLength;
    if (total > maxBytes) {
      await reader.cancel().catch(() => undefined);
      return { ok: false, response: problems(413, `Request body over ${maxBytes} bytes.`) };
    }
    chunks.push(value);
  }
  const text = Buffer.concat(chunks).toString('utf8');
  if (!text.trim()) return { ok: true, value: {} };
  // Nesting is bounded before parsing, so no later step (validation, storage) recurses over a hostile depth.
  if (jsonDepth(text) > MAX_JSON_DEPTH) {
    return { ok: false, response: problems(400, 'The request body nests too deeply.', [{ field: 'body', message: `arrays and objects nest more than ${MAX_JSON_DEPTH} levels deep`, expected: `at most ${MAX_JSON_DEPTH} levels` }]) };
  }
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (e) {
    return { ok: false, response: problems(400, 'The request body is not valid JSON.', [{ message: (e as Error).message }]) };
  }
  // PostgreSQL cannot store a NUL character in text; name the field instead of failing in a query.
  const nul = nulPath(value, '');
  if (nul !== undefined) {
    return { ok: false, response: problems(400, 'The request body holds a NUL character.', [{ field: nul || undefined, message: `${nul || 'the body'} contains a NUL character (\\u0000)` }]) };
  }
  return { ok: true, value };
}

/** Dotted path of the first string (value or key) holding U+0000, or undefined when there is none. */
function nulPath(value: unknown, path: string): string | undefined {
  if (typeof value === 'string') return value.includes('\0') ? path : undefined;
  if (Array.isArray(value)) {
    for (let i = 0; i < value.length; i++) {
      const found = nulPath(value[i], path ? `${path}.${i}` : String(i));
      if (found !== undefined) return found;
    }
    return undefined;
  }
  if (value && typeof value === 'object') {
    for (const [k, v] of Object.entries(value)) {
      const here = path ? `${path}.${k}` : k;
      if (k.includes('\0')) return here.replaceAll('\0', '\\0');
      const found = nulPath(v, here);
      if (found !== undefined) return found;
    }
  }
  return undefined;
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
