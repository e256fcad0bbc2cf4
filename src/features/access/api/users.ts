import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { createUserRequest, updateUserRequest, UserOut } from '../../../../shared/contracts/auth.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export const usersQuery = queryOptions({
  queryKey: ['users'],
  queryFn: ({ signal }) => api<UserOut[]>(paths.users, { signal }),
});

export function useUsers(enabled: boolean) {
  return useQuery({ ...usersQuery, enabled });
}

export function useCreateUser() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: z.input<typeof createUserRequest>) => api<UserOut>(paths.users, { body }),
    onSuccess: () => qc.invalidateQueries({ queryKey: usersQuery.queryKey }),
  });
}

export function useUpdateUser() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: ({ id, ...body }: { id: number } & z.input<typeof updateUserRequest>) => api<UserOut>(paths.user(id), { method: 'PATCH', body }),
    onSuccess: () => qc.invalidateQueries({ queryKey: usersQuery.queryKey }),
  });
}

export function useDeleteUser() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (id: number) => api<{ ok: true }>(paths.user(id), { method: 'DELETE' }),
    onSuccess: () => qc.invalidateQueries({ queryKey: usersQuery.queryKey }),
  });
}
