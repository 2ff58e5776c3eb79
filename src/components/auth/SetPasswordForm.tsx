import { useState } from 'react';
import { api } from '../../lib/shared/api-client';

export default function SetPasswordForm({ token, email }: { token: string; email: string }) {
  const [error, setError] = useState('');
  const [done, setDone] = useState(false);

  async function submit(e: React.FormEvent<HTMLFormElement>) {
    e.preventDefault();
    const f = new FormData(e.currentTarget);
    const password = String(f.get('password') ?? '');
    if (password !== String(f.get('confirm') ?? '')) {
      setError('The two passwords differ.');
      return;
    }
    const r = await api<{ email: string }>(`/api/invitations/${encodeURIComponent(token)}`, { method: 'POST', json: { password } });
    if (r.error) setError(r.error.error);
    else setDone(true);
  }

  if (done)
    return (
      <p className="notice" role="status">
        Your password is set. <a href={`/signin?email=${encodeURIComponent(email)}`}>Sign in</a>
      </p>
    );
  return (
    <form onSubmit={submit} className="flex flex-col gap-4" noValidate>
      <p>Choose a password for <strong>{email}</strong> (at least 10 characters).</p>
      <label className="field"><span>Password</span><input className="input" type="password" name="password" autoComplete="new-password" required minLength={10} aria-invalid={error ? true : undefined} aria-describedby={error ? 'set-password-problem' : undefined} /></label>
      <label className="field"><span>Repeat the password</span><input className="input" type="password" name="confirm" autoComplete="new-password" required aria-invalid={error ? true : undefined} aria-describedby={error ? 'set-password-problem' : undefined} /></label>
      {error && <p role="alert" id="set-password-problem" className="notice notice-error">✕ {error}</p>}
      <button className="btn" type="submit">Set password</button>
    </form>
  );
}
