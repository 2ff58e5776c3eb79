import { createHmac } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { pullPath } from '../../src/cli/pull';
import { asLocalProblem, remoteFrom } from '../../src/cli/remote';
import { formatProblem } from '../../src/lib/engine/types';
import { verifyWebhook, webhookSignature } from '../../src/lib/server/webhooks';

describe('offsetry pull', () => {
  it('maps each format to its route; certificate to the parameter-set certificate route', () => {
    expect(pullPath('abc', 'json')).toBe('/api/parameter-sets/abc/export?format=json');
    expect(pullPath('abc', 'urdf')).toBe('/api/parameter-sets/abc/export?format=urdf');
    expect(pullPath('abc', 'certificate')).toBe('/api/parameter-sets/abc/certificate');
  });
});

describe('server problems printed like the local parser', () => {
  it('names the local file for line problems and the request field otherwise', () => {
    expect(formatProblem(asLocalProblem({ file: 'upload.csv', line: 3, column: 'q2', message: 'x' }, 'my/session.csv'))).toBe('my/session.csv, line 3, field q2: x');
    expect(formatProblem(asLocalProblem({ field: 'measuredOn', message: 'y', expected: 'YYYY-MM-DD' }, 'my/session.csv'))).toBe('field measuredOn: y (expected YYYY-MM-DD)');
  });
});

describe('server and token', () => {
  it('takes the flags first, then OFFSETRY_URL / OFFSETRY_TOKEN', () => {
    const env = { OFFSETRY_URL: 'https://a.example', OFFSETRY_TOKEN: 'ofs_env' };
    expect(remoteFrom({}, '', env)).toMatchObject({ token: 'ofs_env' });
    expect(remoteFrom({ server: 'http://127.0.0.1:9/base', token: 'ofs_flag' }, '', env).base.href).toBe('http://127.0.0.1:9/base/');
    expect(() => remoteFrom({}, '', {})).toThrow(/OFFSETRY_URL/);
    expect(() => remoteFrom({ server: 'ftp://x' }, '', { OFFSETRY_TOKEN: 't' })).toThrow(/http/);
  });
});

describe('webhook signature', () => {
  const secret = 'whsec_test';
  const body = '{"id":"1","type":"fit.finished"}';
  const now = 1_800_000_000_000;
  const ts = now / 1000;

  it('is v1= and the hex HMAC-SHA256 of "timestamp.body" (node:crypto as the reference)', () => {
    expect(webhookSignature(secret, ts, body)).toBe('v1=' + createHmac('sha256', secret).update(`${ts}.${body}`).digest('hex'));
  });

  it('verifies only the same body, timestamp and secret, within the tolerance', () => {
    const signature = webhookSignature(secret, ts, body);
    expect(verifyWebhook(secret, { signature, timestamp: String(ts) }, body, 300, now)).toBe(true);
    expect(verifyWebhook(secret, { signature, timestamp: String(ts) }, body + ' ', 300, now)).toBe(false);
    expect(verifyWebhook('whsec_other', { signature, timestamp: String(ts) }, body, 300, now)).toBe(false);
    expect(verifyWebhook(secret, { signature, timestamp: String(ts + 1) }, body, 300, now)).toBe(false);
    expect(verifyWebhook(secret, { signature, timestamp: String(ts) }, body, 300, now + 301_000)).toBe(false);
    expect(verifyWebhook(secret, { signature: null, timestamp: String(ts) }, body, 300, now)).toBe(false);
  });
});
