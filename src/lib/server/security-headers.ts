/**
 * Browser hardening on every response: a Content-Security-Policy, frame protection, nosniff, a referrer
 * policy, and HSTS in production mode.
 *
 * Scripts: only this origin's files plus the inline scripts the page itself carries (Astro's island loader
 * and our small page scripts), each allowed by its SHA-256 hash computed from the HTML being sent, so an
 * injected script (which would have another hash) does not run. Styles allow inline style attributes
 * (React and the charts set them); style attributes cannot run code. connect-src adds the file store's
 * origin for presigned uploads.
 */
import { createHash } from 'node:crypto';
import { config } from './config';

const INLINE_SCRIPT = /<script\b(?![^>]*\bsrc=)[^>]*>([\s\S]*?)<\/script>/gi;

/** The 'sha256-…' sources for every inline script in an HTML document. */
export function inlineScriptHashes(html: string): string[] {
  const out = new Set<string>();
  for (const m of html.matchAll(INLINE_SCRIPT)) out.add(`'sha256-${createHash('sha256').update(m[1]!, 'utf8').digest('base64')}'`);
  return [...out];
}

function storeOrigin(): string {
  const endpoint = config().S3_ENDPOINT;
  if (!endpoint) return 'https://*.amazonaws.com';
  return new URL(endpoint).origin;
}

export function contentSecurityPolicy(scriptHashes: string[]): string {
  return [
    "default-src 'self'",
    `script-src 'self' ${scriptHashes.join(' ')}`.trim(),
    "style-src 'self' 'unsafe-inline'",
    "img-src 'self' data: blob:",
    "font-src 'self' data:",
    `connect-src 'self' ${storeOrigin()}`,
    "worker-src 'self' blob:",
    "object-src 'none'",
    "base-uri 'self'",
    "form-action 'self'",
    "frame-ancestors 'none'",
  ].join('; ');
}

/** The headers every response gets (the CSP is added for HTML by the middleware). */
export function hardeningHeaders(): Record<string, string> {
  const h: Record<string, string> = {
    'x-content-type-options': 'nosniff',
    'x-frame-options': 'DENY',
    // Invitation links carry a token in their path: never send the path to another site.
    'referrer-policy': 'same-origin',
    'cross-origin-opener-policy': 'same-origin',
    'permissions-policy': 'camera=(), microphone=(), geolocation=(), payment=()',
  };
  if (config().OFFSETRY_MODE === 'production') h['strict-transport-security'] = 'max-age=31536000; includeSubDomains';
  return h;
}

/** Add the hardening headers (and, for HTML, the CSP with the page's inline-script hashes) to a response. */
export async function harden(response: Response): Promise<Response> {
  let out = response;
  const type = response.headers.get('content-type') ?? '';
  if (type.includes('text/html') && response.body) {
    const html = await response.text();
    out = new Response(html, { status: response.status, statusText: response.statusText, headers: new Headers(response.headers) });
    out.headers.set('content-security-policy', contentSecurityPolicy(inlineScriptHashes(html)));
  } else if (!out.headers.has('content-security-policy')) {
    // Anything else (JSON, files): nothing in it may run or be framed.
    try {
      out.headers.set('content-security-policy', "default-src 'none'; frame-ancestors 'none'; sandbox");
    } catch {
      out = new Response(out.body, { status: out.status, statusText: out.statusText, headers: new Headers(out.headers) });
      out.headers.set('content-security-policy', "default-src 'none'; frame-ancestors 'none'; sandbox");
    }
  }
  for (const [k, v] of Object.entries(hardeningHeaders())) {
    try {
      out.headers.set(k, v);
    } catch {
      out = new Response(out.body, { status: out.status, statusText: out.statusText, headers: new Headers(out.headers) });
      out.headers.set(k, v);
    }
  }
  return out;
}
