import { useState } from 'react';
import { api, type ApiError } from '../../lib/shared/api-client';
import { useFocusWhen } from '../../lib/shared/focus';
import { ErrorSummary, FieldProblem, fieldProps } from '../FormErrors';

const INVITE_FIELDS = {
  email: { id: 'invite-email', label: 'E-mail' },
  name: { id: 'invite-name', label: 'Name' },
  roles: { id: 'invite-roles', label: 'Roles' },
};
import { ROLE_LABELS, ROLES, type Role } from '../../lib/shared/roles';

interface Person { id: string; email: string; name: string; roles: Role[]; active: boolean; isDemo: boolean; hasPassword: boolean }

export default function PeopleAdmin({ initial, selfId }: { initial: Person[]; selfId: string }) {
  const [people, setPeople] = useState(initial);
  const [message, setMessage] = useState<{ kind: 'ok' | 'error'; text: string } | null>(null);
  const [inviteRoles, setInviteRoles] = useState<Role[]>(['technician']);
  const [inviteError, setInviteError] = useState<ApiError | null>(null);
  // An error takes focus; a saved change is announced (role=status) without pulling focus out of the table.
  const messageRef = useFocusWhen<HTMLParagraphElement>(message?.kind === 'error' ? message : null);

  async function refresh() {
    const r = await api<{ users: Person[] }>('/api/admin/users');
    if (r.data) setPeople(r.data.users);
  }

  async function invite(e: React.FormEvent<HTMLFormElement>) {
    e.preventDefault();
    const f = new FormData(e.currentTarget);
    const form = e.currentTarget;
    const r = await api<{ user: Person }>('/api/admin/users', { method: 'POST', json: { email: f.get('email'), name: f.get('name'), roles: inviteRoles } });
    if (r.error) {
      // The summary at the top of the form lists each problem with a link to its field; what was typed stays.
      setInviteError(r.error);
      return;
    }
    setInviteError(null);
    form.reset();
    setMessage({ kind: 'ok', text: `Invitation sent to ${r.data.user.email}.` });
    await refresh();
  }

  async function patch(p: Person, change: Partial<Pick<Person, 'roles' | 'active'>>) {
    const r = await api<{ user: Person }>(`/api/admin/users/${p.id}`, { method: 'PATCH', json: change });
    if (r.error) setMessage({ kind: 'error', text: r.error.error });
    else {
      setMessage({ kind: 'ok', text: `Saved ${p.email}.` });
      await refresh();
    }
  }

  const toggle = (list: Role[], role: Role) => (list.includes(role) ? list.filter((r) => r !== role) : [...list, role]);

  return (
    <div className="flex flex-col gap-6">
      <form onSubmit={invite} className="card flex flex-col gap-3" aria-label="Invite a person" noValidate>
        <h2>Invite a person</h2>
        <ErrorSummary error={inviteError} fields={INVITE_FIELDS} />
        <div className="grid gap-3 sm:grid-cols-2">
          <label className="field"><span>E-mail</span><input className="input" name="email" type="email" required {...fieldProps(inviteError, 'email', INVITE_FIELDS.email.id)} /><FieldProblem error={inviteError} field="email" id={INVITE_FIELDS.email.id} /></label>
          <label className="field"><span>Name</span><input className="input" name="name" required {...fieldProps(inviteError, 'name', INVITE_FIELDS.name.id)} /><FieldProblem error={inviteError} field="name" id={INVITE_FIELDS.name.id} /></label>
        </div>
        <fieldset className="flex flex-wrap gap-4" id={INVITE_FIELDS.roles.id} tabIndex={-1}>
          <legend className="mb-1 text-sm font-semibold text-ink-soft">Roles</legend>
          {ROLES.map((role) => (
            <label key={role} className="flex min-h-11 items-center gap-2">
              <input type="checkbox" name={`invite-${role}`} checked={inviteRoles.includes(role)} onChange={() => setInviteRoles(toggle(inviteRoles, role))} />
              {ROLE_LABELS[role]}
            </label>
          ))}
          <FieldProblem error={inviteError} field="roles" id={INVITE_FIELDS.roles.id} />
        </fieldset>
        <button className="btn self-start" type="submit">Send invitation</button>
      </form>
      {message && <p ref={messageRef} role={message.kind === 'ok' ? 'status' : 'alert'} className={message.kind === 'ok' ? 'notice' : 'notice notice-error'}>{message.text}</p>}
      <div className="card overflow-x-auto">
        <table className="data-table">
          <thead>
            <tr><th>Person</th>{ROLES.map((r) => <th key={r}>{ROLE_LABELS[r]}</th>)}<th>Status</th><th /></tr>
          </thead>
          <tbody>
            {people.map((p) => (
              <tr key={p.id} data-person={p.email}>
                <td><div className="font-semibold">{p.name}</div><div className="text-sm text-ink-soft">{p.email}{p.isDemo ? ' · demo' : ''}</div></td>
                {ROLES.map((role) => (
                  <td key={role}>
                    <input
                      type="checkbox"
                      aria-label={`${ROLE_LABELS[role]} for ${p.email}`}
                      checked={p.roles.includes(role)}
                      disabled={p.id === selfId && role === 'admin'}
                      onChange={() => patch(p, { roles: toggle(p.roles, role) })}
                      className="h-5 w-5"
                    />
                  </td>
                ))}
                <td>{p.active ? (p.hasPassword ? '● Active' : '◌ Invited') : '✕ Deactivated'}</td>
                <td>
                  {p.id !== selfId && (
                    <button className="btn btn-quiet" type="button" onClick={() => patch(p, { active: !p.active })}>
                      {p.active ? 'Deactivate' : 'Reactivate'}
                    </button>
                  )}
                </td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </div>
  );
}
