import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join, relative } from 'node:path';

export interface RouteFile {
  file: string;
  /** The file-route pattern, e.g. /api/units/[serial] */
  pattern: string;
  methods: string[];
}

const API_DIR = new URL('../../src/pages/api/', import.meta.url).pathname;

/** Every endpoint file under src/pages/api with the HTTP methods it exports (auth-astro's injected route excluded). */
export function apiRouteFiles(dir = API_DIR): RouteFile[] {
  const out: RouteFile[] = [];
  for (const name of readdirSync(dir)) {
    const full = join(dir, name);
    if (statSync(full).isDirectory()) {
      out.push(...apiRouteFiles(full));
      continue;
    }
    if (!/\.(ts|js)$/.test(name)) continue;
    const rel = relative(API_DIR, full).replace(/\.(ts|js)$/, '').replace(/(^|\/)index$/, '');
    const source = readFileSync(full, 'utf8');
    const methods = [...source.matchAll(/export\s+(?:const|async\s+function|function)\s+(GET|POST|PUT|PATCH|DELETE)\b/g)].map((m) => m[1]!);
    out.push({ file: relative(process.cwd(), full), pattern: '/api' + (rel ? '/' + rel : ''), methods });
  }
  return out.sort((a, b) => a.pattern.localeCompare(b.pattern));
}

/** A concrete path for a pattern: parameters become a syntactically valid but unknown id. */
export function samplePath(pattern: string) {
  return pattern.replace(/\[\.\.\.[^\]]+\]/g, 'x/y').replace(/\[[^\]]+\]/g, '00000000-0000-4000-8000-000000000000');
}
