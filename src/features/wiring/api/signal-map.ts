import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { MappingPut, mappingPutOut } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { invalidateWiring } from './tags-config.ts';

/** `PUT /plants/:plantId/signal-map`: this signal of this target is now that tag (replacing the one before). */
export function usePutMapping(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: MappingPut) => api<z.output<typeof mappingPutOut>>(paths.signalMap(plantId), { method: 'PUT', body }),
    onSuccess: () => invalidateWiring(qc, plantId),
  });
}

/** `DELETE /signal-map/:id`. */
export function useDeleteMapping(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (id: number) => api<{ deleted: true; id: number }>(paths.signalMapping(id), { method: 'DELETE' }),
    onSuccess: () => invalidateWiring(qc, plantId),
  });
}
