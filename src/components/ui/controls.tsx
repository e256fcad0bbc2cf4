import type { ButtonHTMLAttributes, ComponentProps, ReactNode } from 'react';
import { ApiError, hasFieldErrors } from '../../lib/api-client.ts';

export function Button({ kind = 'normal', className = '', ...rest }: ButtonHTMLAttributes<HTMLButtonElement> & { kind?: 'normal' | 'primary' | 'quiet' }) {
  const look =
    kind === 'primary'
      ? 'bg-ink text-panel-2 border-ink hover:bg-ink-2'
      : kind === 'quiet'
        ? 'bg-transparent border-transparent hover:border-edge text-ink-2'
        : 'bg-panel-2 border-edge hover:bg-white text-ink';
  return <button type="button" className={`h-7 px-3 border rounded-sm text-[13px] whitespace-nowrap disabled:opacity-50 ${look} ${className}`} {...rest} />;
}

export function Field({ label, unit, error, hint, children }: { label: string; unit?: string; error?: string[] | undefined; hint?: ReactNode; children: ReactNode }) {
  return (
    <label className="flex flex-col gap-0.5 text-[12px]">
      <span className="text-ink-2">
        {label}
        {unit ? <span className="text-ink-3"> [{unit}]</span> : null}
      </span>
      {children}
      {hint ? <span className="text-ink-3">{hint}</span> : null}
      {error?.length ? (
        <span role="alert" className="text-alarm-1">
          {error.join('; ')}
        </span>
      ) : null}
    </label>
  );
}

/** A text input; takes a ref (React 19 passes it as a prop), so react-hook-form's `register` spreads onto it. */
export function TextInput(props: ComponentProps<'input'>) {
  return <input {...props} className={`h-7 px-2 border border-edge rounded-sm bg-white text-ink ${props.className ?? ''}`} />;
}

export function Select(props: ComponentProps<'select'>) {
  return <select {...props} className={`h-7 px-1 border border-edge rounded-sm bg-white text-ink ${props.className ?? ''}`} />;
}

export function Panel({ title, actions, children, className = '' }: { title: string; actions?: ReactNode; children: ReactNode; className?: string }) {
  return (
    <section className={`bg-panel border border-edge rounded-sm ${className}`} aria-label={title}>
      <header className="flex items-center justify-between px-2 h-7 border-b border-edge bg-panel-2">
        <h2 className="text-[12px] font-semibold uppercase tracking-wide text-ink-2">{title}</h2>
        <div className="flex gap-1">{actions}</div>
      </header>
      <div className="p-2">{children}</div>
    </section>
  );
}

/** A failed request, said plainly; field errors are shown beside their fields by the form. */
export function ErrorNote({ error }: { error: unknown }) {
  if (!error) return null;
  const msg = error instanceof ApiError ? error.message : error instanceof Error ? error.message : String(error);
  return (
    <p role="alert" className="border border-alarm-1 bg-white px-2 py-1 text-alarm-1">
      {msg}
    </p>
  );
}

/**
 * What a form could not put beside a field: a failed request without field errors (those are set
 * on the fields, lib/form.ts), and server field errors for paths the form has no field for.
 */
export function FormProblem({ error, root }: { error: unknown; root?: string | undefined }) {
  return (
    <>
      {root ? <ErrorNote error={new Error(root)} /> : null}
      {error && !hasFieldErrors(error) ? <ErrorNote error={error} /> : null}
    </>
  );
}
