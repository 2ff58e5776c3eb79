import { useState } from 'react';
import { api } from '../../lib/shared/api-client';

interface Token { id: string; name: string; prefix: string; createdAt: string; lastUsedAt: string | null; revokedAt: string | null }

/** Personal API tokens for scripts (Authorization: Bearer …); the secret is shown once. */
export default function TokenManager({ initial }: { initial: Token[] }) {
  const [tokens, setTokens] = useState(initial);
  const [fresh, setFresh] = useState<string | null>(null);
  const [error, setError] = useState('');

  const refresh = async () => {
    const r = await api<{ tokens: Token[] }>('/api/tokens');
    if (r.data) setTokens(r.data.tokens);
  };

  async function create(e: React.FormEvent<HTMLFormElement>) {
    e.preventDefault();
    const form = e.currentTarget;
    const name = String(new FormData(form).get('name') ?? '');
    const r = await api<{ token: string }>('/api/tokens', { method: 'POST', json: { name } });
    if (r.error) return setError(r.error.error);
    setError('');
    setFresh(r.data.token);
    form.reset();
    await refresh();
  }

  async function revoke(id: string) {
    const r = await api(`/api/tokens/${id}`, { method: 'DELETE' });
    if (r.error) setError(r.error.error);
    await refresh();
  }

  return (
    <div className="flex flex-col gap-4">
      <form onSubmit={create} className="flex flex-wrap items-end gap-3">
        <label className="field"><span>Token name</span><input className="input" name="name" required placeholder="e.g. cell 4 upload script" aria-invalid={error ? true : undefined} aria-describedby={error ? 'token-problem' : undefined} /></label>
        <button className="btn" type="submit">Create token</button>
      </form>
      {fresh && (
        <p className="notice" role="status">
          Copy this token now; it is not shown again: <code data-new-token className="break-all font-mono">{fresh}</code>
        </p>
      )}
      {error && <p className="notice notice-error" role="alert" id="token-problem">✕ {error}</p>}
      <table className="data-table">
        <thead><tr><th>Name</th><th>Starts with</th><th>Created</th><th>Last used</th><th>Status</th><th /></tr></thead>
        <tbody>
          {tokens.map((t) => (
            <tr key={t.id}>
              <td>{t.name}</td><td className="font-mono">{t.prefix}…</td>
              <td className="num">{new Date(t.createdAt).toLocaleString()}</td>
              <td className="num">{t.lastUsedAt ? new Date(t.lastUsedAt).toLocaleString() : '—'}</td>
              <td>{t.revokedAt ? '✕ revoked' : '● active'}</td>
              <td>{!t.revokedAt && <button className="btn btn-quiet" type="button" onClick={() => revoke(t.id)}>Revoke</button>}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </div>
  );
}
