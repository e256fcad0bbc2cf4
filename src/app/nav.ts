/** Views and the lowest role that sees each (the server checks the same roles on every route). */
export const NAV = [
  { to: '/trends', label: 'Trends', role: 'analyst' },
  { to: '/signals', label: 'Signals', role: 'analyst' },
  { to: '/what-if', label: 'What-if', role: 'analyst' },
  { to: '/access', label: 'Access', role: 'analyst' },
] as const;
