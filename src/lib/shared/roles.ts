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

export interface NavItem {
  href: string;
  label: string;
  roles: readonly Role[];
}

/** The application's navigation in DESIGN.md's order; each entry lists the roles that may open it. */
export const NAVIGATION: readonly NavItem[] = [
  { href: '/units', label: 'Units', roles: ROLES },
  { href: '/sessions', label: 'Sessions', roles: ['technician', 'engineer', 'quality', 'admin'] },
  { href: '/fits', label: 'Fits', roles: ['technician', 'engineer', 'quality', 'admin'] },
  { href: '/reviews', label: 'Reviews', roles: ['engineer', 'admin'] },
  { href: '/fleet', label: 'Fleet', roles: ['quality', 'engineer', 'admin'] },
  { href: '/exports', label: 'Exports', roles: ['service', 'quality', 'admin'] },
  { href: '/arm-models', label: 'Arm models', roles: ['technician', 'engineer', 'quality', 'admin'] },
  { href: '/admin/people', label: 'People', roles: ['admin'] },
];

export const hasAnyRole = (held: readonly string[], allowed: readonly Role[]) => held.some((r) => (allowed as readonly string[]).includes(r));

export const navigationFor = (held: readonly string[]) => NAVIGATION.filter((n) => hasAnyRole(held, n.roles));
