import { useMemo } from 'react';
import { useForm } from 'react-hook-form';
import type { z } from 'zod';
import { createTokenRequest, createUserRequest, type CreateTokenRequest, type TokenOut, type UserOut } from '../../../../shared/contracts/auth.ts';
import { ROLES, roleAtLeast, type Role } from '../../../../shared/contracts/roles.ts';
import { Button, ErrorNote, Field, FormProblem, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText } from '../../../lib/form.ts';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { useMe } from '../../auth/api/me.ts';
import { useCreateToken, useRevokeToken, useTokens } from '../api/tokens.ts';
import { useCreateUser, useDeleteUser, useUpdateUser, useUsers } from '../api/users.ts';

type TokenValues = { name: string; role: Role; expiresInDays: string };
const tokenResolver = contractResolver(createTokenRequest, (v: TokenValues) => ({ name: v.name, role: v.role, expiresInDays: numberOrText(v.expiresInDays) }));

function TokensPanel({ myRole }: { myRole: Role }) {
  const tokens = useTokens();
  const create = useCreateToken();
  const revoke = useRevokeToken();
  const form = useForm<TokenValues, unknown, CreateTokenRequest>({ defaultValues: { name: '', role: 'analyst', expiresInDays: '90' }, resolver: tokenResolver });
  const { errors } = form.formState;
  const submit = form.handleSubmit((body) => create.mutate(body, { onSuccess: () => form.setValue('name', ''), onError: (e) => applyServerErrors(e, form) }));
  const columns = useMemo(() => tokenColumns(revoke.mutate), [revoke.mutate]);
  const table = useDataTable({ data: tokens.data ?? [], columns, getRowId: (t) => String(t.id), initialState: { sorting: [{ id: 'expiresAt', desc: true }] } });
  return (
    <Panel title="My API tokens">
      <form onSubmit={(e) => void submit(e)} noValidate className="flex flex-wrap items-end gap-2 mb-2" aria-label="New API token">
        <Field label="Name" error={fieldError(errors, 'name')}>
          <TextInput {...form.register('name')} placeholder="e.g. monthly report" aria-invalid={errors.name ? true : undefined} />
        </Field>
        <Field label="Role" error={fieldError(errors, 'role')}>
          <Select {...form.register('role')}>
            {ROLES.filter((r) => roleAtLeast(myRole, r)).map((r) => (
              <option key={r}>{r}</option>
            ))}
          </Select>
        </Field>
        <Field label="Expires in" unit="d" error={fieldError(errors, 'expiresInDays')}>
          <TextInput {...form.register('expiresInDays')} className="w-20 num" inputMode="numeric" aria-invalid={errors.expiresInDays ? true : undefined} />
        </Field>
        <Button kind="primary" type="submit" disabled={create.isPending}>
          Create token
        </Button>
      </form>
      <FormProblem error={create.error} root={errors.root?.server?.message} />
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
      <DataTable table={table} label="API tokens" empty={tokens.data ? 'No tokens yet.' : null} />
    </Panel>
  );
}

const utcMinutes = (iso: string | null) => (iso ? iso.slice(0, 16).replace('T', ' ') : '—');
const tokenState = (t: TokenOut) => (t.revokedAt ? 'revoked' : Date.parse(t.expiresAt) < Date.now() ? 'expired' : 'active');

function tokenColumns(revoke: (id: number) => void): ColumnDef<TokenOut>[] {
  return [
    { id: 'name', header: 'Name', accessorKey: 'name' },
    { id: 'role', header: 'Role', accessorKey: 'role', meta: { width: '90px' } },
    { id: 'prefix', header: 'Prefix', accessorKey: 'prefix', enableSorting: false, cell: (c) => `${c.row.original.prefix}…`, meta: { width: '110px', cellClass: 'num' } },
    { id: 'expiresAt', header: 'Expires (UTC)', accessorKey: 'expiresAt', cell: (c) => utcMinutes(c.row.original.expiresAt), meta: { width: '140px', cellClass: 'num' } },
    { id: 'lastUsedAt', header: 'Last used (UTC)', accessorFn: (t) => t.lastUsedAt ?? '', cell: (c) => utcMinutes(c.row.original.lastUsedAt), meta: { width: '140px', cellClass: 'num' } },
    { id: 'state', header: 'State', accessorFn: tokenState, meta: { width: '80px' } },
    {
      id: 'actions',
      header: () => <span className="sr-only">Actions</span>,
      enableSorting: false,
      meta: { width: '90px' },
      cell: ({ row: { original: t } }) =>
        tokenState(t) === 'active' ? (
          <Button kind="quiet" onClick={() => revoke(t.id)} aria-label={`Revoke token ${t.name}`}>
            Revoke
          </Button>
        ) : null,
    },
  ];
}

type UserValues = { email: string; name: string; role: Role; password: string };
const EMPTY_USER: UserValues = { email: '', name: '', role: 'operator', password: '' };
const userResolver = contractResolver(createUserRequest, (v: UserValues) => ({ ...v, email: v.email.trim() }));

function UsersPanel({ myId }: { myId: number }) {
  const users = useUsers(true);
  const create = useCreateUser();
  const update = useUpdateUser();
  const del = useDeleteUser();
  const form = useForm<UserValues, unknown, z.output<typeof createUserRequest>>({ defaultValues: EMPTY_USER, resolver: userResolver });
  const { errors } = form.formState;
  const submit = form.handleSubmit((body) => create.mutate(body, { onSuccess: () => form.reset(EMPTY_USER), onError: (e) => applyServerErrors(e, form) }));
  const columns = useMemo(() => userColumns(myId, update.mutate, del.mutate), [myId, update.mutate, del.mutate]);
  const table = useDataTable({ data: users.data ?? [], columns, getRowId: (u) => String(u.id), initialState: { sorting: [{ id: 'email', desc: false }] } });
  const err = (name: keyof UserValues) => fieldError(errors, name);
  return (
    <Panel title="Users">
      <form onSubmit={(e) => void submit(e)} noValidate className="flex flex-wrap items-end gap-2 mb-2" aria-label="New user">
        <Field label="E-mail" error={err('email')}>
          <TextInput type="email" {...form.register('email')} aria-invalid={errors.email ? true : undefined} />
        </Field>
        <Field label="Name" error={err('name')}>
          <TextInput {...form.register('name')} aria-invalid={errors.name ? true : undefined} />
        </Field>
        <Field label="Role" error={err('role')}>
          <Select {...form.register('role')}>
            {ROLES.map((r) => (
              <option key={r}>{r}</option>
            ))}
          </Select>
        </Field>
        <Field label="Initial password (≥ 12 characters)" error={err('password')}>
          <TextInput type="password" autoComplete="new-password" {...form.register('password')} aria-invalid={errors.password ? true : undefined} />
        </Field>
        <Button kind="primary" type="submit" disabled={create.isPending}>
          Create user
        </Button>
      </form>
      <FormProblem error={create.error} root={errors.root?.server?.message} />
      {create.isSuccess ? <p role="status" className="mb-2">User {create.data.email} created.</p> : null}
      <ErrorNote error={users.error ?? update.error ?? del.error} />
      <DataTable table={table} label="Users" />
    </Panel>
  );
}

function userColumns(myId: number, update: (v: { id: number; role?: Role; disabled?: boolean }) => void, del: (id: number) => void): ColumnDef<UserOut>[] {
  return [
    { id: 'email', header: 'E-mail', accessorKey: 'email' },
    { id: 'name', header: 'Name', accessorKey: 'name' },
    {
      id: 'role',
      header: 'Role',
      accessorKey: 'role',
      meta: { width: '150px' },
      cell: ({ row: { original: u } }) => (
        <Select aria-label={`Role of ${u.email}`} value={u.role} disabled={u.id === myId} onChange={(e) => update({ id: u.id, role: e.target.value as Role })}>
          {ROLES.map((r) => (
            <option key={r}>{r}</option>
          ))}
        </Select>
      ),
    },
    { id: 'state', header: 'State', accessorFn: (u) => (u.disabled ? 'disabled' : 'active'), meta: { width: '90px' } },
    {
      id: 'actions',
      header: () => <span className="sr-only">Actions</span>,
      enableSorting: false,
      meta: { width: '150px' },
      cell: ({ row: { original: u } }) =>
        u.id !== myId ? (
          <div className="flex gap-1">
            <Button kind="quiet" onClick={() => update({ id: u.id, disabled: !u.disabled })}>
              {u.disabled ? 'Enable' : 'Disable'}
            </Button>
            <Button kind="quiet" onClick={() => window.confirm(`Delete ${u.email} and all its tokens?`) && del(u.id)}>
              Delete
            </Button>
          </div>
        ) : (
          <span className="text-ink-3">you</span>
        ),
    },
  ];
}

export default function AccessPage() {
  const me = useMe();
  if (!me.data) return null;
  return (
    <div className="grid gap-2 max-w-[1200px]">
      <header className="flex items-baseline gap-3 px-0.5 h-8">
        <h1 className="text-[15px] font-semibold">Access</h1>
        <span className="text-[12px] text-ink-3">
          {me.data.role === 'admin' ? 'API tokens for scripts and reports, and who may sign in with which role.' : 'API tokens for scripts and reports; a token never has more rights than your role.'}
        </span>
      </header>
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
