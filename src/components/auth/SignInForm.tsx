import { useEffect, useState, type FormEvent } from 'react';
import { safeNextPath } from '../../lib/shared/safe-redirect';

/** Posts credentials to Auth.js (with its CSRF token) and goes to `next` on success. */
export default function SignInForm({ next, initialError }: { next: string; initialError?: string }) {
  const [error, setError] = useState(initialError ?? '');
  const [busy, setBusy] = useState(false);
  // Until the island is hydrated the button stays disabled, so a native submit can never put the password in a URL.
  const [ready, setReady] = useState(false);
  useEffect(() => setReady(true), []);

  async function submit(e: FormEvent<HTMLFormElement>) {
    e.preventDefault();
    setBusy(true);
    setError('');
    const form = new FormData(e.currentTarget);
    try {
      const { csrfToken } = await (await fetch('/api/auth/csrf')).json();
      const res = await fetch('/api/auth/callback/credentials', {
        method: 'POST',
        headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1' },
        body: new URLSearchParams({
          csrfToken,
          email: String(form.get('email') ?? ''),
          password: String(form.get('password') ?? ''),
          callbackUrl: next,
        }),
      });
      const body = (await res.json().catch(() => ({}))) as { url?: string };
      const url = new URL(body.url ?? '/signin?error=unknown', location.origin);
      const code = url.searchParams.get('code');
      if (url.searchParams.get('error') || !res.ok) {
        setError(
          code === 'rate_limited'
            ? 'Too many failed sign-ins for this address. Wait 15 minutes, or ask an administrator.'
            : 'E-mail or password is not right, or the account is not active.',
        );
        setBusy(false);
        return;
      }
      location.href = safeNextPath(next);
    } catch {
      setError('The server could not be reached. Check the connection and try again.');
      setBusy(false);
    }
  }

  return (
    <form onSubmit={submit} method="post" className="flex flex-col gap-4" noValidate>
      <label className="field">
        <span>E-mail</span>
        <input className="input" name="email" type="email" autoComplete="username" required aria-invalid={error ? true : undefined} aria-describedby={error ? 'signin-problem' : undefined} />
      </label>
      <label className="field">
        <span>Password</span>
        <input className="input" name="password" type="password" autoComplete="current-password" required aria-invalid={error ? true : undefined} aria-describedby={error ? 'signin-problem' : undefined} />
      </label>
      {error && (
        <p role="alert" id="signin-problem" className="notice notice-error">
          ✕ {error}
        </p>
      )}
      <button className="btn" type="submit" disabled={busy || !ready}>
        {busy ? 'Signing in…' : 'Sign in'}
      </button>
    </form>
  );
}
