import {
  ADMINS,
  CERTIFICATE_READERS,
  COMPENSATION_READERS,
  COMPENSATORS,
  ENGINEERING,
  EVERYONE,
  EXPORT_LOG_READERS,
  EXPORTERS,
  FLEET_READERS,
  MEASURERS,
  MODEL_EDITORS,
  REVIEWERS,
  type Role,
} from './roles';

/**
 * The access table: every API route and page prefix with the roles allowed per method. src/middleware.ts
 * enforces it before any endpoint runs; tests/integration/route-roles.test.ts enumerates src/pages/api and
 * fails for any endpoint file missing here, then checks anonymous → 401 and every other role → 403.
 * 'public' = no sign-in; 'signed-in' = any active user.
 */
export type Access = 'public' | 'signed-in' | readonly Role[];
export type Method = 'GET' | 'POST' | 'PUT' | 'PATCH' | 'DELETE';

export interface RouteRule {
  /** Path pattern in the file-route form of src/pages/api: /api/units/[serial] */
  pattern: string;
  methods: Partial<Record<Method, Access>>;
}

export const API_ROUTES: readonly RouteRule[] = [
  { pattern: '/api/health', methods: { GET: 'public' } },
  { pattern: '/api/me', methods: { GET: 'signed-in' } },
  { pattern: '/api/me/sign-out-everywhere', methods: { POST: 'signed-in' } },
  { pattern: '/api/invitations/[token]', methods: { GET: 'public', POST: 'public' } },
  { pattern: '/api/tokens', methods: { GET: 'signed-in', POST: 'signed-in' } },
  { pattern: '/api/tokens/[id]', methods: { DELETE: 'signed-in' } },
  { pattern: '/api/admin/users', methods: { GET: ADMINS, POST: ADMINS } },
  { pattern: '/api/admin/users/[id]', methods: { PATCH: ADMINS } },
  { pattern: '/api/admin/mail', methods: { GET: ADMINS } },
  // Described API and signed webhooks
  { pattern: '/api/openapi.json', methods: { GET: 'public' } },
  { pattern: '/api/admin/webhooks', methods: { GET: ADMINS, POST: ADMINS } },
  { pattern: '/api/admin/webhooks/[id]', methods: { DELETE: ADMINS } },
  { pattern: '/api/admin/webhooks/deliveries', methods: { GET: ADMINS } },
  // Arm models, units, sessions
  { pattern: '/api/arm-models', methods: { GET: ENGINEERING, POST: MODEL_EDITORS } },
  // Geometry is read by the same roles on the page (/arm-models/…), in the model API and as a file.
  { pattern: '/api/arm-models/[id]', methods: { GET: ENGINEERING, PUT: MODEL_EDITORS } },
  { pattern: '/api/arm-models/[id]/geometry', methods: { GET: ENGINEERING } },
  { pattern: '/api/units', methods: { GET: EVERYONE, POST: MEASURERS } },
  { pattern: '/api/units/[serial]', methods: { GET: EVERYONE } },
  { pattern: '/api/units/[serial]/pose-plan', methods: { GET: MEASURERS, POST: MEASURERS } },
  { pattern: '/api/sessions', methods: { GET: ENGINEERING, POST: MEASURERS } },
  { pattern: '/api/sessions/uploads', methods: { POST: MEASURERS } },
  { pattern: '/api/sessions/[id]', methods: { GET: ENGINEERING } },
  { pattern: '/api/sessions/[id]/file', methods: { GET: ENGINEERING } },
  { pattern: '/api/sessions/[id]/poses', methods: { GET: ENGINEERING } },
  { pattern: '/api/sessions/[id]/check', methods: { GET: ENGINEERING } },
  // Fits and reviews
  { pattern: '/api/sessions/[id]/fits', methods: { GET: ENGINEERING, POST: MEASURERS } },
  { pattern: '/api/fits', methods: { GET: ENGINEERING } },
  { pattern: '/api/fits/[id]', methods: { GET: ENGINEERING } },
  // The fit report's per-pose part, paged (JSON) or streamed (CSV): same readers as the fit.
  { pattern: '/api/fits/[id]/poses', methods: { GET: ENGINEERING } },
  { pattern: '/api/fits/[id]/submit', methods: { POST: MEASURERS } },
  { pattern: '/api/fits/[id]/approve', methods: { POST: REVIEWERS } },
  { pattern: '/api/fits/[id]/reject', methods: { POST: REVIEWERS } },
  { pattern: '/api/fits/[id]/refit', methods: { POST: MEASURERS } },
  { pattern: '/api/units/[serial]/parameter-sets', methods: { GET: EVERYONE } },
  { pattern: '/api/units/[serial]/compare', methods: { GET: ENGINEERING } },
  { pattern: '/api/units/[serial]/history', methods: { GET: EVERYONE } },
  // Fleet, drift and exports
  { pattern: '/api/arm-models/[id]/fleet', methods: { GET: FLEET_READERS } },
  { pattern: '/api/arm-models/[id]/tolerances', methods: { GET: FLEET_READERS, PUT: MODEL_EDITORS } },
  { pattern: '/api/arm-models/[id]/judgement', methods: { GET: FLEET_READERS, PUT: MODEL_EDITORS } },
  { pattern: '/api/units/[serial]/drift', methods: { GET: FLEET_READERS } },
  { pattern: '/api/alerts', methods: { GET: FLEET_READERS } },
  { pattern: '/api/alerts/[id]/acknowledge', methods: { POST: FLEET_READERS } },
  { pattern: '/api/parameter-sets/[id]/export', methods: { GET: EXPORTERS } },
  // Calibration certificate (PDF) and the before/after accuracy map of an approved set
  { pattern: '/api/parameter-sets/[id]/certificate', methods: { GET: CERTIFICATE_READERS } },
  { pattern: '/api/parameter-sets/[id]/accuracy-map', methods: { GET: CERTIFICATE_READERS } },
  { pattern: '/api/exports', methods: { GET: EXPORT_LOG_READERS, POST: EXPORTERS } },
  // The export picker: units with an approved set, a page at a time, and every serial a search matches.
  { pattern: '/api/exports/units', methods: { GET: EXPORTERS } },
  { pattern: '/api/exports/units/serials', methods: { GET: EXPORTERS } },
  // Compensated programs: engineers and service managers make and download them; quality reads them.
  { pattern: '/api/units/[serial]/compensations', methods: { GET: COMPENSATION_READERS, POST: COMPENSATORS } },
  { pattern: '/api/compensations', methods: { GET: COMPENSATION_READERS } },
  { pattern: '/api/compensations/[id]', methods: { GET: COMPENSATION_READERS } },
  { pattern: '/api/compensations/[id]/file', methods: { GET: COMPENSATORS } },
];

/** Page prefixes that need more than a signed-in user; the longest matching prefix wins. */
export const PAGE_RULES: readonly { prefix: string; roles: Access }[] = [
  { prefix: '/signin', roles: 'public' },
  { prefix: '/invite/', roles: 'public' },
  { prefix: '/admin', roles: ADMINS },
  { prefix: '/sessions', roles: ENGINEERING },
  { prefix: '/fits', roles: ENGINEERING },
  { prefix: '/reviews', roles: REVIEWERS },
  { prefix: '/fleet', roles: FLEET_READERS },
  { prefix: '/exports', roles: EXPORT_LOG_READERS },
  { prefix: '/arm-models', roles: ENGINEERING },
  { prefix: '/units', roles: EVERYONE },
  // Unit sub-pages show what their API routes show, to the same roles.
  { prefix: '/units/[serial]/compare', roles: ENGINEERING },
  { prefix: '/units/[serial]/drift', roles: FLEET_READERS },
  { prefix: '/units/[serial]/compensate', roles: COMPENSATORS },
  { prefix: '/compensations', roles: COMPENSATION_READERS },
  { prefix: '/account', roles: 'signed-in' },
];

const compiled = API_ROUTES.map((r) => ({
  rule: r,
  regex: new RegExp('^' + r.pattern.replace(/\[\.\.\.[^\]]+\]/g, '.+').replace(/\[[^\]]+\]/g, '[^/]+') + '/?$'),
  // Static segments win over parameters: /api/sessions/uploads before /api/sessions/[id].
  score: r.pattern.split('/').filter((s) => !s.startsWith('[')).length,
})).sort((a, b) => b.score - a.score);

export function matchApiRoute(pathname: string): RouteRule | undefined {
  return compiled.find((c) => c.regex.test(pathname))?.rule;
}

const pageRules = PAGE_RULES.map((r) => {
  const body = r.prefix.replace(/\/$/, '').split('/').map((seg) => (/^\[[^\]]+\]$/.test(seg) ? '[^/]+' : seg.replace(/[.*+?^${}()|\\]/g, '\\$&'))).join('/');
  // A prefix covers itself and everything below it (a trailing slash: only what is below).
  return { ...r, regex: new RegExp('^' + body + (r.prefix.endsWith('/') ? '/' : '(/|$)')), depth: r.prefix.split('/').length };
});

export function pageAccess(pathname: string): Access {
  let best: (typeof pageRules)[number] | undefined;
  for (const rule of pageRules) {
    if (rule.regex.test(pathname) && (!best || rule.depth > best.depth || (rule.depth === best.depth && rule.prefix.length > best.prefix.length))) best = rule;
  }
  return best?.roles ?? 'signed-in';
}

export function allows(access: Access, roles: readonly string[]): boolean {
  if (access === 'public' || access === 'signed-in') return true;
  return roles.some((r) => (access as readonly string[]).includes(r));
}
