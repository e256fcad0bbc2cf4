import { useState, type FormEvent } from 'react';
import { ROLES, roleAtLeast, type Role } from '../../../../shared/contracts/roles.ts';
import { Button, ErrorNote, Field, fieldErrors, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { useMe } from '../../auth/api/me.ts';
import { useCreateToken, useRevokeToken, useTokens } from '../api/tokens.ts';
import { useCreateUser, useDeleteUser, useUpdateUser, useUsers } from '../api/users.ts';

const th = 'text-left font-semibold text-ink-2 px-1.5 py-1 border-b border-edge';
const td = 'px-1.5 py-1 border-b border-edge/50';

function TokensPanel({ myRole }: { myRole: Role }) {
  const tokens = useTokens();
  const create = useCreateToken();
  const revoke = useRevokeToken();
  const [name, setName] = useState('');
  const [role, setRole] = useState<Role>('analyst');
  const [days, setDays] = useState('90');
  const fe = fieldErrors(create.error);
  const submit = (e: FormEvent) => {
    e.preventDefault();
    create.mutate({ name, role, expiresInDays: Number(days) }, { onSuccess: () => setName('') });
  };
  return (
    <Panel title="My API tokens">
      <form onSubmit={submit} className="flex flex-wrap items-end gap-2 mb-2" aria-label="New API token">
        <Field label="Name" error={fe.name}>
          <TextInput name="tokenName" value={name} onChange={(e) => setName(e.target.value)} required placeholder="e.g. monthly report" />
        </Field>
        <Field label="Role" error={fe.role}>
          <Select name="tokenRole" value={role} onChange={(e) => setRole(e.target.value as Role)}>
            {ROLES.filter((r) => roleAtLeast(myRole, r)).map((r) => (
              <option key={r}>{r}</option>
            ))}
          </Select>
        </Field>
        <Field label="Expires in" unit="d" error={fe.expiresInDays}>
          <TextInput name="tokenDays" className="w-20 num" inputMode="numeric" value={days} onChange={(e) => setDays(e.target.value)} />
        </Field>
        <Button kind="primary" type="submit" disabled={create.isPending}>
          Create token
        </Button>
      </form>
      {create.error && !Object.keys(fe).length ? <ErrorNote error={create.error} /> : null}
      {create.data ? (
        <div className="border border-ink bg-white p-2 mb-2" role="status">
          <p className="font-semibold">Copy this token now — it is shown once and stored only as a hash.</p>
          <code className="num select-all break-all" data-testid="new-token">
            {create.data.token}
          </code>
          <p className="text-ink-3 text-[12px]">Send it as the header Authorization: Bearer &lt;token&gt;. Expires {new Date(create.data.expiresAt).toISOString().slice(0, 10)}.</p>
        </div>
      ) : null}
      <ErrorNote error={tokens.error ?? revoke.error} />
      <table className="w-full text-[12px]">
        <thead>
          <tr>
            <th className={th}>Name</th>
            <th className={th}>Role</th>
            <th className={th}>Prefix</th>
            <th className={th}>Expires (UTC)</th>
            <th className={th}>Last used (UTC)</th>
            <th className={th}>State</th>
            <th className={th} />
          </tr>
        </thead>
        <tbody>
          {tokens.data?.map((t) => {
            const expired = new Date(t.expiresAt).getTime() < Date.now();
            return (
              <tr key={t.id}>
                <td className={td}>{t.name}</td>
                <td className={td}>{t.role}</td>
                <td className={`${td} num`}>{t.prefix}…</td>
                <td className={`${td} num`}>{t.expiresAt.slice(0, 16).replace('T', ' ')}</td>
                <td className={`${td} num`}>{t.lastUsedAt ? t.lastUsedAt.slice(0, 16).replace('T', ' ') : '—'}</td>
                <td className={td}>{t.revokedAt ? 'revoked' : expired ? 'expired' : 'active'}</td>
                <td className={td}>
                  {!t.revokedAt && !expired ? (
                    <Button kind="quiet" onClick={() => revoke.mutate(t.id)} aria-label={`Revoke token ${t.name}`}>
                      Revoke
                    </Button>
                  ) : null}
                </td>
              </tr>
            );
          })}
          {tokens.data?.length === 0 ? (
            <tr>
              <td className={`${td} text-ink-3`} colSpan={7}>
                No tokens yet.
              </td>
            </tr>
          ) : null}
        </tbody>
      </table>
    </Panel>
  );
}

function UsersPanel({ myId }: { myId: number }) {
  const users = useUsers(true);
  const create = useCreateUser();
  const update = useUpdateUser();
  const del = useDeleteUser();
  const [form, setForm] = useState({ email: '', name: '', role: 'operator' as Role, password: '' });
  const fe = fieldErrors(create.error);
  const submit = (e: FormEvent) => {
    e.preventDefault();
    create.mutate(form, { onSuccess: () => setForm({ email: '', name: '', role: 'operator', password: '' }) });
  };
  return (
    <Panel title="Users">
      <form onSubmit={submit} className="flex flex-wrap items-end gap-2 mb-2" aria-label="New user">
        <Field label="E-mail" error={fe.email}>
          <TextInput name="userEmail" type="email" required value={form.email} onChange={(e) => setForm({ ...form, email: e.target.value })} />
        </Field>
        <Field label="Name" error={fe.name}>
          <TextInput name="userName" required value={form.name} onChange={(e) => setForm({ ...form, name: e.target.value })} />
        </Field>
        <Field label="Role" error={fe.role}>
          <Select name="userRole" value={form.role} onChange={(e) => setForm({ ...form, role: e.target.value as Role })}>
            {ROLES.map((r) => (
              <option key={r}>{r}</option>
            ))}
          </Select>
        </Field>
        <Field label="Initial password (≥ 12 characters)" error={fe.password}>
          <TextInput name="userPassword" type="password" autoComplete="new-password" required value={form.password} onChange={(e) => setForm({ ...form, password: e.target.value })} />
        </Field>
        <Button kind="primary" type="submit" disabled={create.isPending}>
          Create user
        </Button>
      </form>
      {create.error && !Object.keys(fe).length ? <ErrorNote error={create.error} /> : null}
      {create.isSuccess ? <p role="status" className="mb-2">User {create.data.email} created.</p> : null}
      <ErrorNote error={users.error ?? update.error ?? del.error} />
      <table className="w-full text-[12px]">
        <thead>
          <tr>
            <th className={th}>E-mail</th>
            <th className={th}>Name</th>
            <th className={th}>Role</th>
            <th className={th}>State</th>
            <th className={th} />
          </tr>
        </thead>
        <tbody>
          {users.data?.map((u) => (
            <tr key={u.id}>
              <td className={td}>{u.email}</td>
              <td className={td}>{u.name}</td>
              <td className={td}>
                <Select aria-label={`Role of ${u.email}`} value={u.role} disabled={u.id === myId} onChange={(e) => update.mutate({ id: u.id, role: e.target.value as Role })}>
                  {ROLES.map((r) => (
                    <option key={r}>{r}</option>
                  ))}
                </Select>
              </td>
              <td className={td}>{u.disabled ? 'disabled' : 'active'}</td>
              <td className={td}>
                {u.id !== myId ? (
                  <div className="flex gap-1">
                    <Button kind="quiet" onClick={() => update.mutate({ id: u.id, disabled: !u.disabled })}>
                      {u.disabled ? 'Enable' : 'Disable'}
                    </Button>
                    <Button kind="quiet" onClick={() => window.confirm(`Delete ${u.email} and all its tokens?`) && del.mutate(u.id)}>
                      Delete
                    </Button>
                  </div>
                ) : (
                  <span className="text-ink-3">you</span>
                )}
              </td>
            </tr>
          ))}
        </tbody>
      </table>
    </Panel>
  );
}

export default function AccessPage() {
  const me = useMe();
  if (!me.data) return null;
  return (
    <div className="grid gap-2 max-w-[1200px]">
      <SectionBoundary name="Tokens">
        <TokensPanel myRole={me.data.role} />
      </SectionBoundary>
      {me.data.role === 'admin' ? (
        <SectionBoundary name="Users">
          <UsersPanel myId={me.data.id} />
        </SectionBoundary>
      ) : null}
    </div>
  );
}
