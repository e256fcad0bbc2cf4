import { useState, type FormEvent } from 'react';
import { Navigate, useLocation } from 'react-router';
import { Button, ErrorNote, Field, fieldErrors, TextInput } from '../../../components/ui/controls.tsx';
import { useLogin, useMe } from '../api/me.ts';

export function LoginPage() {
  const me = useMe();
  const login = useLogin();
  const location = useLocation();
  const [email, setEmail] = useState('');
  const [password, setPassword] = useState('');
  const from = (location.state as { from?: string } | null)?.from ?? '/';
  if (me.data) return <Navigate to={from} replace />;
  const fe = fieldErrors(login.error);
  const submit = (e: FormEvent) => {
    e.preventDefault();
    login.mutate({ email, password });
  };
  return (
    <main className="min-h-full flex items-center justify-center">
      <form onSubmit={submit} className="w-[340px] bg-panel border border-edge rounded-sm p-4 flex flex-col gap-3" aria-label="Sign in">
        <div>
          <h1 className="text-[18px] font-semibold">Flocstream</h1>
          <p className="text-ink-3 text-[12px]">Solids balance monitor — sign in</p>
        </div>
        <Field label="E-mail" error={fe.email}>
          <TextInput type="email" name="email" autoComplete="username" required value={email} onChange={(e) => setEmail(e.target.value)} autoFocus />
        </Field>
        <Field label="Password" error={fe.password}>
          <TextInput type="password" name="password" autoComplete="current-password" required value={password} onChange={(e) => setPassword(e.target.value)} />
        </Field>
        {login.error && !Object.keys(fe).length ? <ErrorNote error={login.error} /> : null}
        <Button kind="primary" type="submit" disabled={login.isPending}>
          {login.isPending ? 'Signing in…' : 'Sign in'}
        </Button>
        <p className="text-[11px] text-ink-3">Advisory only: Flocstream reads the plant and never writes to the control system.</p>
      </form>
    </main>
  );
}
