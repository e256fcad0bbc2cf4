/** Views and the lowest role that sees each (the server checks the same roles on every route). */
export const NAV = [
  { to: '/board', label: 'Board', role: 'analyst' },
  { to: '/alarms', label: 'Alarms', role: 'analyst' },
  { to: '/trends', label: 'Trends', role: 'analyst' },
  { to: '/signals', label: 'Signals', role: 'analyst' },
  { to: '/setup', label: 'Setup', role: 'integrator' },
  { to: '/wiring', label: 'Wiring', role: 'integrator' },
  { to: '/what-if', label: 'What-if', role: 'analyst' },
  { to: '/lab', label: 'Lab', role: 'operator' },
  { to: '/access', label: 'Access', role: 'analyst' },
  { to: '/outbox', label: 'Outbox', role: 'admin' },
] as const;
