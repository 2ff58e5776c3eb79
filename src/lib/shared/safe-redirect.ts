/**
 * Where to go after sign-in: only a path on this application's own origin. The decision is made on the URL
 * as a browser would parse it (backslashes, tabs and newlines, "//host", "/\host", encoded forms), not on the
 * raw text, and the answer is rebuilt from the parsed path so nothing the parser would read differently
 * survives. Anything else gives the fallback.
 */
export function safeNextPath(raw: string | null | undefined, fallback = '/'): string {
  if (!raw || raw.length > 2000) return fallback;
  const probe = 'http://offsetry.invalid';
  let url: URL;
  try {
    url = new URL(raw, probe + '/');
  } catch {
    return fallback;
  }
  if (url.origin !== probe) return fallback;
  const out = url.pathname + url.search + url.hash;
  // Belt and braces: a result a browser could read as another host is never returned.
  if (!out.startsWith('/') || out.startsWith('//') || out.startsWith('/\\')) return fallback;
  return out;
}
