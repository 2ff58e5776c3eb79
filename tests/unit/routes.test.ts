import { describe, expect, it } from 'vitest';
import { allows, matchApiRoute, pageAccess } from '../../src/lib/shared/routes';
import { navigationFor } from '../../src/lib/shared/roles';

describe('access table matching', () => {
  it('prefers static segments over parameters', () => {
    expect(matchApiRoute('/api/sessions/uploads')?.pattern).toBe('/api/sessions/uploads');
    expect(matchApiRoute('/api/sessions/abc')?.pattern).toBe('/api/sessions/[id]');
    expect(matchApiRoute('/api/sessions/abc/file')?.pattern).toBe('/api/sessions/[id]/file');
  });

  it('does not match across segments or unknown paths', () => {
    expect(matchApiRoute('/api/units/a/b/c')).toBeUndefined();
    expect(matchApiRoute('/api/unknown')).toBeUndefined();
    expect(matchApiRoute('/api/units/../admin/users')).toBeUndefined();
  });

  it('gives pages the longest matching prefix', () => {
    expect(pageAccess('/admin/people')).toEqual(['admin']);
    expect(pageAccess('/signin')).toBe('public');
    expect(pageAccess('/signinx')).toBe('signed-in');
    expect(pageAccess('/invite/abc')).toBe('public');
    expect(pageAccess('/')).toBe('signed-in');
    expect(pageAccess('/units/ABC-1')).toHaveLength(5);
    expect(pageAccess('/units/ABC-1/compare')).not.toContain('service');
    expect(pageAccess('/units/ABC-1/drift')).toEqual(['quality', 'engineer', 'admin']);
    expect(pageAccess('/unitsx')).toBe('signed-in');
  });

  it('allows by any held role', () => {
    expect(allows(['engineer', 'admin'], ['quality', 'admin'])).toBe(true);
    expect(allows(['engineer'], ['quality'])).toBe(false);
    expect(allows('signed-in', [])).toBe(true);
  });

  it('navigation follows the roles held', () => {
    expect(navigationFor(['service']).map((n) => n.label)).toEqual(['Units', 'Exports']);
    expect(navigationFor(['admin']).map((n) => n.label)).toContain('People');
  });
});
