import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { ConfigChange, PlantConfig } from '../../../../shared/contracts/plant-config.ts';
import type { PlantCreate, PlantModelOut, PlantOut, PlantPatch } from '../../../../shared/contracts/plant-model.ts';
import type { PutSettingsRequest, SettingsOut } from '../../../../shared/contracts/settings.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export type UnitCollection = 'trains' | 'basins' | 'clarifiers' | 'pumps';

export const plantModelQuery = (plantId: number) => queryOptions({ queryKey: ['plants', plantId, 'model'], queryFn: ({ signal }) => api<PlantModelOut>(paths.plantModel(plantId), { signal }) });

export function usePlantModel(plantId: number) {
  return useQuery(plantModelQuery(plantId));
}

export function usePlantSettings(plantId: number) {
  return useQuery({ queryKey: ['settings', plantId], queryFn: ({ signal }) => api<SettingsOut>(paths.withQuery(paths.settings, { plantId }), { signal }) });
}

/** Every plant view reads the model, layout, balance or tags: a model change refreshes the plant's queries and the plant list. */
function useInvalidatePlant(plantId: number | null) {
  const qc = useQueryClient();
  return () => Promise.all([qc.invalidateQueries({ queryKey: ['plants'] }), plantId !== null ? qc.invalidateQueries({ queryKey: ['settings', plantId] }) : null]);
}

/** `POST /plants` (a plain plant) answering the new plant. */
export function useCreatePlant() {
  const done = useInvalidatePlant(null);
  return useMutation({ mutationFn: (body: PlantCreate) => api<PlantOut>(paths.plants, { body }), onSuccess: done });
}

export function usePatchPlant(plantId: number) {
  const done = useInvalidatePlant(plantId);
  return useMutation({ mutationFn: (body: PlantPatch) => api<PlantOut>(paths.plant(plantId), { method: 'PATCH', body }), onSuccess: done });
}

/** `POST /plants/:plantId/{trains|basins|clarifiers|pumps}`; the body is a parsed contract schema. */
export function useCreateUnit(plantId: number, kind: UnitCollection) {
  const done = useInvalidatePlant(plantId);
  return useMutation({ mutationFn: (body: object) => api<{ id: number }>(paths.plantUnits(plantId, kind), { body }), onSuccess: done });
}

/** `PATCH /plants/:plantId/{kind}/:id`: geometry and inService become a version from effectiveFrom. */
export function usePatchUnit(plantId: number, kind: UnitCollection) {
  const done = useInvalidatePlant(plantId);
  return useMutation({ mutationFn: ({ id, body }: { id: number; body: object }) => api<{ id: number }>(paths.plantUnit(plantId, kind, id), { method: 'PATCH', body }), onSuccess: done });
}

export function usePutSettings(plantId: number) {
  const done = useInvalidatePlant(plantId);
  return useMutation({ mutationFn: (body: PutSettingsRequest) => api<SettingsOut>(paths.settings, { method: 'PUT', body }), onSuccess: done });
}

export function fetchPlantConfig(plantId: number) {
  return api<PlantConfig>(paths.plantConfig(plantId));
}

/** `PUT /plants/:plantId/config[?dryRun=1]`: the changes a document makes, applied unless dryRun. */
export function usePutConfig(plantId: number) {
  const done = useInvalidatePlant(plantId);
  return useMutation({
    mutationFn: ({ doc, dryRun }: { doc: unknown; dryRun: boolean }) => api<{ plantId: number; applied: boolean; changes: ConfigChange[] }>(paths.withQuery(paths.plantConfig(plantId), { dryRun: dryRun ? 1 : undefined }), { method: 'PUT', body: doc }),
    onSuccess: (r) => (r.applied ? done() : undefined),
  });
}
