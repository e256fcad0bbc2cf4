import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { LoginRequest, Me } from '../../../../shared/contracts/auth.ts';
import { api, ApiError } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** The signed-in user, or null when the session is missing or expired. */
export const meQuery = queryOptions({
  queryKey: ['auth', 'me'],
  queryFn: async ({ signal }): Promise<Me | null> => {
    try {
      return await api<Me>(paths.me, { signal });
    } catch (e) {
      if (e instanceof ApiError && e.status === 401) return null;
      throw e;
    }
  },
  staleTime: 60_000,
});

export function useMe() {
  return useQuery(meQuery);
}

export function useLogin() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: LoginRequest) => api<Me>(paths.login, { body }),
    onSuccess: (me) => qc.setQueryData(meQuery.queryKey, me),
  });
}

export function useLogout() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: () => api<{ ok: true }>(paths.logout, { method: 'POST' }),
    onSuccess: () => {
      qc.clear();
      qc.setQueryData(meQuery.queryKey, null);
    },
  });
}
