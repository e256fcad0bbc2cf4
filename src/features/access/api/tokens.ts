import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { CreateTokenRequest, createTokenResponse, TokenOut } from '../../../../shared/contracts/auth.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export const tokensQuery = queryOptions({
  queryKey: ['tokens'],
  queryFn: ({ signal }) => api<TokenOut[]>(paths.tokens, { signal }),
});

export function useTokens() {
  return useQuery(tokensQuery);
}

export function useCreateToken() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: CreateTokenRequest) => api<z.output<typeof createTokenResponse>>(paths.tokens, { body }),
    onSuccess: () => qc.invalidateQueries({ queryKey: tokensQuery.queryKey }),
  });
}

export function useRevokeToken() {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (id: number) => api<{ ok: true }>(paths.token(id), { method: 'DELETE' }),
    onSuccess: () => qc.invalidateQueries({ queryKey: tokensQuery.queryKey }),
  });
}
