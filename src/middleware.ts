import type { APIContext, MiddlewareNext } from 'astro';
import { defineMiddleware, sequence } from 'astro:middleware';
import { getSession } from 'auth-astro/server';
import { randomUUID } from 'node:crypto';
import { allows, API_ROUTES, pageAccess, type Method } from './lib/shared/routes';
import { config, configProblems } from './lib/server/config';
import { isServiceUnavailable, json } from './lib/server/http';
import { log } from './lib/server/log';
import { activeUserBySession, userByBearer } from './lib/server/users';
import { startBackground } from './lib/server/background';
import { harden } from './lib/server/security-headers';
import { BodyTooLarge, LIMITED_BY_ENDPOINT, bodyLimit, limitedStream, readCapped } from './lib/server/body-limit';

const isApi = (path: string) => path === '/api' || path.startsWith('/api/');
const isAuthRoute = (route: string) => route === '/api/auth/[...auth]';
const UNSAFE = new Set(['POST', 'PUT', 'PATCH', 'DELETE']);
export const CLIENT_HEADER = 'x-offsetry-client-address';

let configChecked = false;
const DEFAULT_LIMIT_FOR_LOG = 1024 * 1024;
const tooLarge = (limit: number) => json({ error: `Request body over ${limit} bytes; reading stopped there.`, errors: [{ field: 'body', message: `the body is larger than ${limit} bytes`, expected: `at most ${limit} bytes` }] }, 413, { connection: 'close' });

/**
 * Hand the request on with its body limited while it streams (see body-limit.ts): a Content-Length over
 * the limit is refused unread; the sign-in callback's small body is read up to its limit; any other body is
 * counted chunk by chunk as the endpoint reads it. The endpoint receives the limited request in place of
 * the original (the same context object, as Astro's own sequence() does for rewrites); the route stays the
 * one the guard checked.
 */
async function limitedNext(context: APIContext, next: MiddlewareNext): Promise<Response> {
  const req = context.request;
  if (req.method === 'GET' || req.method === 'HEAD' || !req.body || LIMITED_BY_ENDPOINT.has(context.routePattern)) return next();
  const limit = bodyLimit(context.routePattern, req.method);
  const declared = Number(req.headers.get('content-length') ?? 0);
  if (declared > limit) return tooLarge(limit);
  let body: BodyInit;
  if (isAuthRoute(context.routePattern)) {
    const bytes = await readCapped(req.body, limit);
    if (!bytes) return tooLarge(limit);
    body = bytes as Uint8Array<ArrayBuffer>;
  } else {
    body = limitedStream(req.body, limit, () => (context.locals.bodyTooLarge = limit));
  }
  (context as { request: Request }).request = new Request(req.url, { method: req.method, headers: req.headers, body, signal: req.signal, duplex: 'half' } as RequestInit);
  return next();
}


/**
 * The configuration check at first use, for deployments that start dist/server/entry.mjs directly rather than
 * through scripts/serve.mjs (which checks before starting): every problem goes to the log, the request gets a
 * 503, and the process exits with 78 (EX_CONFIG) instead of serving half-configured.
 */
function configRefusal(): Response | undefined {
  if (configChecked) return undefined;
  const found = configProblems();
  if (!found.length) {
    configChecked = true;
    return undefined;
  }
  const message = `Offsetry configuration is incomplete; the server stops:\n  ${found.join('\n  ')}`;
  log('error', 'configuration incomplete', { problems: found });
  process.stderr.write(message + '\n');
  setTimeout(() => process.exit(78), 200);
  return json({ error: 'The server is not configured completely and is stopping; see its log.' }, 503);
}

/** Request id, structured access log, and a clean 503 when PostgreSQL (or S3) is away. */
const observe = defineMiddleware(async (context, next) => {
  const refusal = configRefusal();
  if (refusal) return refusal;
  startBackground();
  const started = performance.now();
  const incoming = context.request.headers.get('x-request-id');
  context.locals.requestId = incoming && /^[\w.-]{1,100}$/.test(incoming) ? incoming : randomUUID();
  // The client's address for sign-in rate limits; the forwarded address is trusted only behind our own proxy.
  const forwarded = config().TRUST_PROXY ? context.request.headers.get('x-forwarded-for')?.split(',')[0]?.trim() : undefined;
  let address = forwarded || 'unknown';
  try {
    address = forwarded || context.clientAddress;
  } catch {
    // clientAddress is unavailable in some contexts (prerendering); keep 'unknown'.
  }
  try {
    context.request.headers.set(CLIENT_HEADER, address);
  } catch {
    // Immutable headers: the auth route then falls back to 'unknown'.
  }
  let response: Response;
  try {
    response = await next();
    if (context.locals.bodyTooLarge && response.status >= 400) response = tooLarge(context.locals.bodyTooLarge);
  } catch (err) {
    if (context.locals.bodyTooLarge || err instanceof BodyTooLarge || (err as { cause?: unknown })?.cause instanceof BodyTooLarge) {
      response = tooLarge(context.locals.bodyTooLarge ?? DEFAULT_LIMIT_FOR_LOG);
    } else if (isServiceUnavailable(err)) {
      log('warn', 'service unavailable', { requestId: context.locals.requestId, path: context.url.pathname, error: String(err) });
      response = json({ error: 'A backing service is unavailable; try again shortly.' }, 503, { 'retry-after': '5' });
    } else {
      log('error', 'unhandled error', { requestId: context.locals.requestId, path: context.url.pathname, error: String((err as Error)?.stack ?? err) });
      response = isApi(context.url.pathname)
        ? json({ error: 'Internal error.', requestId: context.locals.requestId }, 500)
        : new Response('Internal error. Request id: ' + context.locals.requestId, { status: 500 });
    }
  }
  response = await harden(response);
  try {
    response.headers.set('x-request-id', context.locals.requestId);
  } catch {
    // Some responses (redirects from Response.redirect) have immutable headers.
  }
  log('info', 'request', {
    requestId: context.locals.requestId,
    method: context.request.method,
    path: context.url.pathname,
    status: response.status,
    ms: Math.round(performance.now() - started),
    user: context.locals.user?.id,
  });
  return response;
});

/**
 * Refuse cross-site state changes made with the session cookie: the Origin (or Sec-Fetch-Site) must be this
 * app's. Bearer-token calls carry no ambient credential and are exempt.
 */
const sameOrigin = defineMiddleware(async (context, next) => {
  const req = context.request;
  if (!UNSAFE.has(req.method) || req.headers.get('authorization')?.startsWith('Bearer ')) return next();
  const origin = req.headers.get('origin');
  const allowed = new Set([new URL(config().PUBLIC_BASE_URL).origin, context.url.origin]);
  const fetchSite = req.headers.get('sec-fetch-site');
  const ok = origin ? allowed.has(origin) : fetchSite === 'same-origin';
  if (ok) return next();
  return json({ error: 'Cross-site request refused: state-changing requests must come from this application (Origin header).' }, 403);
});

/** Resolve the user once: bearer token first, else the Auth.js session cookie. */
const resolveUser = defineMiddleware(async (context, next) => {
  if (isAuthRoute(context.routePattern)) return next();
  const authz = context.request.headers.get('authorization');
  if (authz?.startsWith('Bearer ')) {
    context.locals.user = await userByBearer(authz.slice(7).trim());
    if (!context.locals.user) return json({ error: 'The bearer token is unknown, revoked, or its user is deactivated.' }, 401);
    return next();
  }
  const session = await getSession(context.request);
  const who = session?.user as { id?: string; sid?: string } | undefined;
  // The cookie alone is not enough: its session row must still be live (sign-out, deactivation and role
  // changes end it on the server).
  if (who?.id && who.sid) context.locals.user = await activeUserBySession(who.id, who.sid);
  return next();
});

/**
 * The last step before an API endpoint. PostgreSQL cannot store a NUL character in text, so a query
 * parameter holding one is refused here rather than failing inside a query. A path the table matched but
 * Astro's router did not (e.g. an encoded "/" in a parameter) gets Astro's HTML 404 page; an API client
 * gets JSON instead.
 */
async function apiNext(context: APIContext, next: () => Promise<Response>) {
  for (const [name, value] of context.url.searchParams) {
    if (name.includes('\0') || value.includes('\0')) {
      const field = name.replaceAll('\0', '\\0').slice(0, 60);
      return json({ error: 'Invalid query.', errors: [{ field, message: `${field} contains a NUL character` }] }, 400);
    }
  }
  const response = await next();
  if (response.status === 404 && !(response.headers.get('content-type') ?? '').includes('json')) {
    return json({ error: `Nothing found at ${context.url.pathname}.` }, 404);
  }
  return response;
}

/**
 * The path the router served, in the router's own form: Astro strips the base (one leading "/"), decodes
 * percent-encodings and matches case-sensitively, so "//api/…", "/%61pi/…" and "/api/./…" reach the endpoint
 * of "/api/…". The rule is therefore looked up by the route Astro matched (context.routePattern), never by
 * the raw URL; this function only decides whether an unmatched request should get a JSON answer.
 */
export function servedPath(pathname: string): string {
  let p = pathname;
  try {
    p = decodeURI(p);
  } catch {
    // Astro refuses undecodable paths itself (400).
  }
  return '/' + p.replace(/^\/+/, '');
}

const ERROR_PAGES = new Set(['/404', '/500']);

/**
 * Enforce the access table for every API route and page, chosen by the route the router matched. The
 * response names that route (x-offsetry-route), so a client or test can see which rule answered.
 */
const guard = defineMiddleware(async (context, next) => {
  const response = await decide(context, next);
  try {
    response.headers.set('x-offsetry-route', context.routePattern);
  } catch {
    // Immutable headers (a redirect made by Response.redirect).
  }
  return response;
});

async function decide(context: APIContext, next: MiddlewareNext): Promise<Response> {
  const route = context.routePattern;
  const shown = context.url.pathname;
  if (isAuthRoute(route)) return limitedNext(context, next);
  const user = context.locals.user;
  if (isApi(route) || (ERROR_PAGES.has(route) && isApi(servedPath(shown)))) {
    // Deny by default: an API route the table does not list (or nothing matched) is refused.
    const rule = API_ROUTES.find((r) => r.pattern === route);
    if (!rule) return json({ error: `No API route ${shown}.` }, 404);
    const access = rule.methods[context.request.method as Method];
    if (!access) {
      return json({ error: `Method ${context.request.method} is not allowed on ${shown}.` }, 405, { allow: Object.keys(rule.methods).join(', ') });
    }
    if (access === 'public') return apiNext(context, () => limitedNext(context, next));
    if (!user) return json({ error: 'Sign in or send an API token (Authorization: Bearer …).' }, 401);
    if (!allows(access, user.roles)) {
      return json({ error: `Your roles (${user.roles.join(', ')}) do not allow ${context.request.method} ${route}.`, allowedRoles: access }, 403);
    }
    return apiNext(context, () => limitedNext(context, next));
  }
  const access = ERROR_PAGES.has(route) ? 'public' : pageAccess(route);
  if (access === 'public') return next();
  if (!user) {
    const nextUrl = servedPath(shown) + context.url.search;
    return context.redirect(`/signin?next=${encodeURIComponent(nextUrl)}`, 303);
  }
  if (!allows(access, user.roles)) return next('/forbidden');
  return next();
}

export const onRequest = sequence(observe, sameOrigin, resolveUser, guard);
