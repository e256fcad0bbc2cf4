import { Suspense } from 'react';
import { NavLink, Navigate, Outlet, useLocation } from 'react-router';
import type { Role } from '../../shared/contracts/roles.ts';
import { roleAtLeast } from '../../shared/contracts/roles.ts';
import { Button } from '../components/ui/controls.tsx';
import { SectionBoundary } from '../components/ui/section-boundary.tsx';
import { useLogout, useMe } from '../features/auth/api/me.ts';
import { NAV } from './nav.ts';

export function AppLayout() {
  const me = useMe();
  const logout = useLogout();
  const location = useLocation();
  if (me.isPending) return <p className="p-4 text-ink-3">Loading…</p>;
  if (!me.data) return <Navigate to="/login" replace state={{ from: location.pathname }} />;
  const role = me.data.role;
  const items = NAV.filter((n) => roleAtLeast(role, n.role as Role));
  return (
    <div className="min-h-full flex flex-col">
      <header className="h-9 flex items-center gap-3 px-3 bg-panel border-b border-edge">
        <span className="font-semibold tracking-tight">Flocstream</span>
        <nav aria-label="Main" className="flex gap-0.5">
          {items.map((n) => (
            <NavLink
              key={n.to}
              to={n.to}
              className={({ isActive }) => `px-2 h-7 leading-7 rounded-sm text-[13px] ${isActive ? 'bg-ink text-panel-2' : 'text-ink-2 hover:bg-panel-2'}`}
            >
              {n.label}
            </NavLink>
          ))}
        </nav>
        <span className="ml-auto text-ink-3 text-[12px]" data-testid="whoami">
          {me.data.email} · {role}
        </span>
        <Button kind="quiet" onClick={() => logout.mutate()}>
          Sign out
        </Button>
      </header>
      <main className="flex-1 p-2">
        <SectionBoundary>
          <Suspense fallback={<p className="p-2 text-ink-3">Loading view…</p>}>
            <Outlet />
          </Suspense>
        </SectionBoundary>
      </main>
    </div>
  );
}
