/** Roles and what each sees. Shared by server and islands (no secrets here). */
export const ROLES = ['technician', 'engineer', 'quality', 'service', 'admin'] as const;
export type Role = (typeof ROLES)[number];

export const ROLE_LABELS: Record<Role, string> = {
  technician: 'Field technician',
  engineer: 'Metrology engineer',
  quality: 'Quality',
  service: 'Service manager',
  admin: 'Administrator',
};

/**
 * Named role groups: who may do what, in words. The access table (routes.ts), the navigation below and
 * the pages' "may this user …" checks all use these, so a group changes in one place.
 */
/** Everyone with an account. */
export const EVERYONE: readonly Role[] = ROLES;
/** Readers of measurement data: sessions, fits, arm models and unit comparisons. */
export const ENGINEERING: readonly Role[] = ['technician', 'engineer', 'quality', 'admin'];
/** Who measures: registers units, uploads sessions, plans poses, and runs, submits and refits fits. */
export const MEASURERS: readonly Role[] = ['technician', 'engineer', 'admin'];
/** Who approves or returns a submitted fit. */
export const REVIEWERS: readonly Role[] = ['engineer', 'admin'];
/** Who creates and edits arm models, their tolerances and judgement rules. */
export const MODEL_EDITORS: readonly Role[] = ['engineer', 'admin'];
/** Who exports parameter files for the controller. */
export const EXPORTERS: readonly Role[] = ['service', 'admin'];
/** Who reads the export log. */
export const EXPORT_LOG_READERS: readonly Role[] = ['service', 'quality', 'admin'];
/** Readers of fleet data: fleet overview, drift and alerts. */
export const FLEET_READERS: readonly Role[] = ['quality', 'engineer', 'admin'];
/** Who downloads calibration certificates and accuracy maps. */
export const CERTIFICATE_READERS: readonly Role[] = ['quality', 'service', 'engineer', 'admin'];
/** Who makes compensated programs and downloads them. */
export const COMPENSATORS: readonly Role[] = ['engineer', 'service', 'admin'];
/** Readers of compensated programs' records. */
export const COMPENSATION_READERS: readonly Role[] = ['engineer', 'service', 'quality', 'admin'];
/** Administrators only. */
export const ADMINS: readonly Role[] = ['admin'];

export interface NavItem {
  href: string;
  label: string;
  roles: readonly Role[];
}

/** The application's navigation in DESIGN.md's order; each entry lists the roles that may open it. */
export const NAVIGATION: readonly NavItem[] = [
  { href: '/units', label: 'Units', roles: EVERYONE },
  { href: '/sessions', label: 'Sessions', roles: ENGINEERING },
  { href: '/fits', label: 'Fits', roles: ENGINEERING },
  { href: '/reviews', label: 'Reviews', roles: REVIEWERS },
  { href: '/fleet', label: 'Fleet', roles: FLEET_READERS },
  { href: '/exports', label: 'Exports', roles: EXPORT_LOG_READERS },
  { href: '/arm-models', label: 'Arm models', roles: ENGINEERING },
  { href: '/admin/people', label: 'People', roles: ADMINS },
];

export const hasAnyRole = (held: readonly string[], allowed: readonly Role[]) => held.some((r) => (allowed as readonly string[]).includes(r));

export const navigationFor = (held: readonly string[]) => NAVIGATION.filter((n) => hasAnyRole(held, n.roles));
