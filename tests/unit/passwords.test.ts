import { describe, expect, it } from 'vitest';
import { hashPassword, passwordProblem, verifyPassword } from '../../src/lib/server/passwords';

describe('password hashing (scrypt)', () => {
  it('verifies the right password and refuses others; never stores the plain text', async () => {
    const h = await hashPassword('correct horse battery');
    expect(h).toMatch(/^scrypt\$32768\$8\$1\$/);
    expect(h).not.toContain('correct');
    expect(await verifyPassword('correct horse battery', h)).toBe(true);
    expect(await verifyPassword('correct horse batterz', h)).toBe(false);
    expect(await verifyPassword('x', null)).toBe(false);
  });

  it('salts each hash', async () => {
    expect(await hashPassword('same password')).not.toBe(await hashPassword('same password'));
  });

  it('states the rule for short passwords', () => {
    expect(passwordProblem('short')).toMatch(/10 characters/);
    expect(passwordProblem('long enough pw')).toBeUndefined();
  });
});
