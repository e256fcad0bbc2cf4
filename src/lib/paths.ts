/** Every API URL the monitor uses, built here and nowhere else. */
const v1 = '/api/v1';
export const paths = {
  health: '/api/health',
  login: `${v1}/auth/login`,
  logout: `${v1}/auth/logout`,
  me: `${v1}/auth/me`,
  users: `${v1}/users`,
  user: (id: number) => `${v1}/users/${id}`,
  tokens: `${v1}/tokens`,
  token: (id: number) => `${v1}/tokens/${id}`,
  calc: (name: 'storm' | 'state-point' | 'settler' | 'srt' | 'svi') => `${v1}/calc/${name}`,
};
