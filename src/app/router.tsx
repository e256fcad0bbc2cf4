import { lazy, Suspense } from 'react';
import { createBrowserRouter, Navigate } from 'react-router';
import { AppLayout } from './layout.tsx';

// Views are code-split: each route loads its own chunk (sign-in too, so the form library loads only with a form).
const LoginPage = lazy(() => import('../features/auth/components/login-page.tsx').then((m) => ({ default: m.LoginPage })));
const AccessPage = lazy(() => import('../features/access/components/access-page.tsx'));
const WhatIfPage = lazy(() => import('../features/what-if/components/what-if-page.tsx'));
const SignalsPage = lazy(() => import('../features/signals/components/signals-page.tsx'));
const TrendsPage = lazy(() => import('../features/trends/components/trends-page.tsx'));
const WiringPage = lazy(() => import('../features/wiring/components/wiring-page.tsx'));
const BoardPage = lazy(() => import('../features/board/components/board-page.tsx'));
const AlarmsPage = lazy(() => import('../features/alarms/components/alarms-page.tsx'));
const LabPage = lazy(() => import('../features/lab/components/lab-page.tsx'));
const SetupPage = lazy(() => import('../features/setup/components/setup-page.tsx'));
const OutboxPage = lazy(() => import('../features/outbox/components/outbox-page.tsx'));

export const router = createBrowserRouter([
  {
    path: '/login',
    element: (
      <Suspense fallback={null}>
        <LoginPage />
      </Suspense>
    ),
  },
  {
    path: '/',
    element: <AppLayout />,
    children: [
      { index: true, element: <Navigate to="/board" replace /> },
      { path: 'board', element: <BoardPage /> },
      { path: 'alarms', element: <AlarmsPage /> },
      { path: 'lab', element: <LabPage /> },
      { path: 'outbox', element: <OutboxPage /> },
      { path: 'what-if', element: <WhatIfPage /> },
      { path: 'access', element: <AccessPage /> },
      { path: 'signals', element: <SignalsPage /> },
      { path: 'trends', element: <TrendsPage /> },
      { path: 'wiring', element: <WiringPage /> },
      { path: 'setup', element: <SetupPage /> },
      { path: '*', element: <p className="p-2">No such view.</p> },
    ],
  },
]);
