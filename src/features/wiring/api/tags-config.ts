import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { TagConfigOut, TagCreate, tagsConfigResponse } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { tagsQuery } from '../../signals/api/tags.ts';

/** `GET /plants/:plantId/tags/config`: addresses, scaling, periods, ranges and mapped signals. */
export function fetchTagsConfig(plantId: number, signal?: AbortSignal) {
  return api<z.output<typeof tagsConfigResponse>>(paths.tagsConfig(plantId), { signal }).then((r) => r.tags);
}

export const tagsConfigQuery = (plantId: number) => queryOptions({ queryKey: ['plants', plantId, 'tags-config'], queryFn: ({ signal }) => fetchTagsConfig(plantId, signal) });

export function useTagsConfig(plantId: number) {
  return useQuery(tagsConfigQuery(plantId));
}

/** After any wiring change: the configuration, the live tag list and the source tag counts. */
export function invalidateWiring(qc: ReturnType<typeof useQueryClient>, plantId: number) {
  return Promise.all([
    qc.invalidateQueries({ queryKey: tagsConfigQuery(plantId).queryKey }),
    qc.invalidateQueries({ queryKey: tagsQuery(plantId).queryKey, exact: true }),
    qc.invalidateQueries({ queryKey: ['plants', plantId, 'sources'] }),
  ]);
}

/** `POST /plants/:plantId/tags`. */
export function useCreateTag(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: TagCreate) => api<TagConfigOut>(paths.plantTags(plantId), { body }),
    onSuccess: () => invalidateWiring(qc, plantId),
  });
}

/** `DELETE /tags/:id` (its mappings go too; stored samples stay). */
export function useDeleteTag(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (tagId: number) => api<{ deleted: true; id: number }>(paths.tag(tagId), { method: 'DELETE' }),
    onSuccess: () => invalidateWiring(qc, plantId),
  });
}
