import { queryOptions, useQuery } from '@tanstack/react-query';
import { useEffect, useState } from 'react';
import type { PlantLayoutOut, PlantSummary } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export const plantsQuery = queryOptions({
  queryKey: ['plants'],
  queryFn: ({ signal }) => api<PlantSummary[]>(paths.plants, { signal }),
  staleTime: 5 * 60_000,
});

export const plantLayoutQuery = (plantId: number) =>
  queryOptions({
    queryKey: ['plants', plantId, 'layout'],
    queryFn: ({ signal }) => api<PlantLayoutOut>(paths.plant(plantId), { signal }),
    staleTime: 5 * 60_000,
  });

export function usePlants() {
  return useQuery(plantsQuery);
}

export function usePlantLayout(plantId: number | null) {
  return useQuery({ ...plantLayoutQuery(plantId ?? 0), enabled: plantId !== null });
}

const KEY = 'flocstream.plantId';

/**
 * The plant the monitor shows: the one chosen last (kept in localStorage), else the first the
 * caller may see. Every plant view takes its id from here.
 */
export function useCurrentPlant(): { plantId: number | null; plants: PlantSummary[]; setPlantId(id: number): void; isPending: boolean } {
  const q = usePlants();
  const [chosen, setChosen] = useState<number | null>(() => {
    const v = Number(localStorage.getItem(KEY));
    return Number.isInteger(v) && v > 0 ? v : null;
  });
  const plants = q.data ?? [];
  const plantId = plants.find((p) => p.id === chosen)?.id ?? plants[0]?.id ?? null;
  useEffect(() => {
    if (plantId !== null) localStorage.setItem(KEY, String(plantId));
  }, [plantId]);
  return { plantId, plants, setPlantId: setChosen, isPending: q.isPending };
}
