/** Small fetch wrapper for islands: JSON in and out, errors as { error, errors } like the API returns. */
export interface ApiError {
  status: number;
  error: string;
  errors: { line?: number; column?: string; field?: string; message: string; expected?: string }[];
}

export async function api<T>(path: string, init: RequestInit & { json?: unknown } = {}): Promise<{ data: T; error?: undefined } | { data?: undefined; error: ApiError }> {
  const headers = new Headers(init.headers);
  let body = init.body;
  if (init.json !== undefined) {
    headers.set('content-type', 'application/json');
    body = JSON.stringify(init.json);
  }
  let res: Response;
  try {
    res = await fetch(path, { ...init, headers, body });
  } catch {
    return { error: { status: 0, error: 'The server could not be reached.', errors: [] } };
  }
  const parsed = await res.json().catch(() => ({}));
  if (!res.ok) return { error: { status: res.status, error: parsed.error ?? res.statusText, errors: parsed.errors ?? [] } };
  return { data: parsed as T };
}
