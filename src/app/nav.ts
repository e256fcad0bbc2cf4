/** Views and the lowest role that sees each (the server checks the same roles on every route). */
export const NAV = [
  { to: '/what-if', label: 'What-if', role: 'analyst' },
  { to: '/access', label: 'Access', role: 'analyst' },
] as const;
