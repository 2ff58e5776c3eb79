import { createHash, randomBytes } from 'node:crypto';

/** Random URL-safe token with a readable prefix; only its SHA-256 is stored. */
export function newToken(prefix: string): { token: string; hash: string } {
  const token = `${prefix}_${randomBytes(24).toString('base64url')}`;
  return { token, hash: sha256(token) };
}

export const sha256 = (s: string | Uint8Array) => createHash('sha256').update(s).digest('hex');
