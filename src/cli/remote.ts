/**
 * Talking to an Offsetry server from the command line: the server and token (flags first, then
 * OFFSETRY_URL / OFFSETRY_TOKEN), JSON requests with the API's refusals turned into CliErrors with exit
 * codes, the server's line/field problems printed like the local parser prints its own, and downloads
 * written only when complete (temp file + rename).
 */
import { createHash } from 'node:crypto';
import { promises as fs } from 'node:fs';
import { basename, dirname, resolve } from 'node:path';
import { formatProblem, type InputProblem } from '../lib/engine/types';
import { CliError, EXIT_INPUT, EXIT_USAGE, problemsMessage } from './common';

/** The server refused the token or the user's roles (401 / 403). */
export const EXIT_DENIED = 4;
/** The server could not be reached, or answered 5xx: try again later. */
export const EXIT_UNAVAILABLE = 5;
/** There is nothing to fetch: the unit has no current approved parameter set. */
export const EXIT_NOTHING = 6;

export const REMOTE_OPTIONS = {
  server: { type: 'string' },
  token: { type: 'string' },
} as const;

export interface Remote {
  base: URL;
  token: string;
}

/** `--server`/`--token`, else OFFSETRY_URL/OFFSETRY_TOKEN; usage error when either is missing. */
export function remoteFrom(values: { server?: string | boolean; token?: string | boolean }, usage: string, env: NodeJS.ProcessEnv = process.env): Remote {
  const server = (typeof values.server === 'string' ? values.server : env.OFFSETRY_URL)?.trim();
  const token = (typeof values.token === 'string' ? values.token : env.OFFSETRY_TOKEN)?.trim();
  if (!server) throw new CliError(`no server: pass --server URL or set OFFSETRY_URL (e.g. https://offsetry.example.com)\n\n${usage}`, EXIT_USAGE);
  if (!token) throw new CliError(`no API token: pass --token or set OFFSETRY_TOKEN (create one on the Account page of ${server})\n\n${usage}`, EXIT_USAGE);
  let base: URL;
  try {
    base = new URL(server.endsWith('/') ? server : server + '/');
  } catch {
    throw new CliError(`--server / OFFSETRY_URL "${server}" is not a URL (expected e.g. https://offsetry.example.com)`, EXIT_USAGE);
  }
  if (base.protocol !== 'http:' && base.protocol !== 'https:') throw new CliError(`--server / OFFSETRY_URL must start with http:// or https:// (got ${base.protocol})`, EXIT_USAGE);
  return { base, token };
}

export interface ServerProblem extends InputProblem {
  field?: string;
}

export interface Refusal {
  status: number;
  error: string;
  errors: ServerProblem[];
  body: Record<string, unknown>;
}

export function url(remote: Remote, path: string) {
  return new URL(path.replace(/^\//, ''), remote.base);
}

/** fetch with the bearer token; network failures become EXIT_UNAVAILABLE. */
export async function send(remote: Remote, path: string, init: RequestInit & { duplex?: 'half' } = {}): Promise<Response> {
  const headers = new Headers(init.headers);
  headers.set('authorization', `Bearer ${remote.token}`);
  headers.set('accept', headers.get('accept') ?? 'application/json');
  headers.set('user-agent', 'offsetry-cli/1');
  try {
    return await fetch(url(remote, path), { ...init, headers, redirect: 'manual' });
  } catch (e) {
    const cause = (e as { cause?: { code?: string; message?: string } }).cause;
    throw new CliError(`cannot reach the server ${remote.base.origin}: ${cause?.code ?? ''} ${cause?.message ?? (e as Error).message}`.replace(/\s+/g, ' ').trim(), EXIT_UNAVAILABLE);
  }
}

/** The API's refusal body `{ error, errors }` (or a plain text reply). */
export async function refusalOf(res: Response): Promise<Refusal> {
  const text = await res.text().catch(() => '');
  let body: Record<string, unknown> = {};
  try {
    body = text ? (JSON.parse(text) as Record<string, unknown>) : {};
  } catch {
    body = { error: text.slice(0, 300) };
  }
  return {
    status: res.status,
    error: typeof body.error === 'string' ? body.error : `HTTP ${res.status}`,
    errors: Array.isArray(body.errors) ? (body.errors as ServerProblem[]) : [],
    body,
  };
}

/** A refusal as a CliError with the exit code of its kind. */
export function refusalError(r: Refusal, what: string, file?: string): CliError {
  if (r.status === 401) return new CliError(`${what}: the server refused the token (${r.error})`, EXIT_DENIED);
  if (r.status === 403) return new CliError(`${what}: not allowed for this token's user (${r.error})`, EXIT_DENIED);
  if (r.status >= 500) return new CliError(`${what}: the server could not answer (HTTP ${r.status}: ${r.error}); try again shortly`, EXIT_UNAVAILABLE);
  if (r.errors.length) return new CliError(problemsMessage(`${what}: ${r.error}`, r.errors.map((p) => asLocalProblem(p, file)), r.body.truncated === true));
  return new CliError(`${what}: ${r.error}`, EXIT_INPUT);
}

/** The server names the column in `column` (file problems) or the request field in `field`; print both like the local parser. */
export function asLocalProblem(p: ServerProblem, file?: string): InputProblem {
  return {
    file: p.line !== undefined ? (file ?? p.file) : undefined,
    line: p.line,
    column: p.column ?? p.field,
    message: p.message,
    expected: p.expected,
  };
}

export const printProblem = formatProblem;

/** GET a JSON resource; refusals throw. */
export async function getJson<T>(remote: Remote, path: string, what: string): Promise<T> {
  const res = await send(remote, path);
  if (!res.ok) throw refusalError(await refusalOf(res), what);
  return (await res.json()) as T;
}

/** GET a JSON resource; undefined when the token's roles may not see it (403), other refusals throw. */
export async function getJsonIfAllowed<T>(remote: Remote, path: string, what: string): Promise<T | undefined> {
  const res = await send(remote, path);
  if (res.status === 403) {
    await res.body?.cancel().catch(() => {});
    return undefined;
  }
  if (!res.ok) throw refusalError(await refusalOf(res), what);
  return (await res.json()) as T;
}

/** Write bytes under `path` only once they are all there (temp file beside it, then rename). */
export async function writeFileAtomically(path: string, bytes: Uint8Array) {
  const full = resolve(path);
  const tmp = resolve(dirname(full), `.${basename(full)}.${process.pid}.${Date.now().toString(36)}.tmp`);
  try {
    await fs.writeFile(tmp, bytes, { flag: 'wx' });
    await fs.rename(tmp, full);
  } catch (e) {
    await fs.rm(tmp, { force: true });
    throw new CliError(`cannot write ${path}: ${(e as Error).message}`);
  }
}

export const sha256Hex = (bytes: Uint8Array) => createHash('sha256').update(bytes).digest('hex');
