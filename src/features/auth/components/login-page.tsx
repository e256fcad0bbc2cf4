import { useForm } from 'react-hook-form';
import { Navigate, useLocation } from 'react-router';
import { loginRequest, type LoginRequest } from '../../../../shared/contracts/auth.ts';
import { Button, Field, FormProblem, TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError } from '../../../lib/form.ts';
import { useLogin, useMe } from '../api/me.ts';

type Values = { email: string; password: string };

const resolver = contractResolver(loginRequest, (v: Values) => ({ email: v.email.trim(), password: v.password }));

export function LoginPage() {
  const me = useMe();
  const login = useLogin();
  const location = useLocation();
  const form = useForm<Values, unknown, LoginRequest>({ defaultValues: { email: '', password: '' }, resolver });
  const { errors } = form.formState;
  const from = (location.state as { from?: string } | null)?.from ?? '/';
  if (me.data) return <Navigate to={from} replace />;
  const submit = form.handleSubmit((body) => login.mutate(body, { onError: (e) => applyServerErrors(e, form) }));
  return (
    <main className="min-h-full flex items-center justify-center">
      <form onSubmit={(e) => void submit(e)} noValidate className="w-[340px] bg-panel border border-edge rounded-sm p-4 flex flex-col gap-3" aria-label="Sign in">
        <div>
          <h1 className="text-[18px] font-semibold">Flocstream</h1>
          <p className="text-ink-3 text-[12px]">Solids balance monitor — sign in</p>
        </div>
        <Field label="E-mail" error={fieldError(errors, 'email')}>
          <TextInput type="email" autoComplete="username" {...form.register('email')} aria-invalid={errors.email ? true : undefined} autoFocus />
        </Field>
        <Field label="Password" error={fieldError(errors, 'password')}>
          <TextInput type="password" autoComplete="current-password" {...form.register('password')} aria-invalid={errors.password ? true : undefined} />
        </Field>
        <FormProblem error={login.error} root={errors.root?.server?.message} />
        <Button kind="primary" type="submit" disabled={login.isPending}>
          {login.isPending ? 'Signing in…' : 'Sign in'}
        </Button>
        <p className="text-[11px] text-ink-3">Advisory only: Flocstream reads the plant and never writes to the control system.</p>
      </form>
    </main>
  );
}
