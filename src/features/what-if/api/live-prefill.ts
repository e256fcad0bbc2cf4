import { useMutation } from '@tanstack/react-query';
import type { FigureOut } from '../../../../shared/contracts/balance.ts';
import type { PlantLayoutOut } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import type { BalanceLive } from '../../board/api/balance-live.ts';
import { paths } from '../../../lib/paths.ts';

/** The storm form's inputs taken from the plant's latest balance, with what could not be filled. */
export interface StormPrefill {
  values: Record<string, string>;
  missing: string[];
  balanceTs: string;
  estimated: boolean;
}

const sum = (xs: Array<number | null>): number | null => (xs.some((x) => x === null) ? null : xs.reduce<number>((a, b) => a + (b ?? 0), 0));

/**
 * Reads the live balance and the layout of a plant and turns them into storm-calculator inputs:
 * flows summed over the trains, MLSS volume-weighted over the basins, total aeration volume and
 * clarifier area, the clarifier inventory and the plant's peak flow as the storm flow.
 */
export async function fetchStormPrefill(plantId: number): Promise<StormPrefill> {
  const [live, layout] = await Promise.all([
    api<Omit<BalanceLive, 'receivedAt'>>(paths.balanceLive(plantId)),
    api<PlantLayoutOut>(paths.plant(plantId)),
  ]);
  if (!live.balance) throw new Error(live.reason ?? 'no balance computed yet for this plant');
  const d = live.balance.data;
  const v = (f: FigureOut | undefined) => (f && f.quality !== 'unavailable' ? f.value : null);
  const basins = d.basins.map((b) => ({ mlss: v(b.mlss_gL), vol: b.volume_m3 }));
  const volume = basins.reduce((a, b) => a + b.vol, 0);
  const mlssMass = sum(basins.map((b) => (b.mlss === null ? null : b.mlss * b.vol)));
  const area = layout.trains.flatMap((t) => t.clarifiers).reduce((a, c) => a + c.area_m2 * c.count, 0);
  const out: Record<string, number | null> = {
    influentFlow_m3h: sum(d.trains.map((t) => v(t.influentFlow_m3h))),
    rasFlow_m3h: sum(d.trains.map((t) => v(t.rasFlow_m3h))),
    mlss_gL: mlssMass === null || volume === 0 ? null : mlssMass / volume,
    svi_mLg: v(d.settleability.svi_mLg),
    aerationVolume_m3: volume || null,
    clarifierArea_m2: area || null,
    stormFlow_m3h: v(d.storm.peakFlow_m3h),
    clarifierMass_kg: v(d.inventory.clarifierMass_kg),
  };
  const values: Record<string, string> = {};
  const missing: string[] = [];
  for (const [k, x] of Object.entries(out)) {
    if (x === null || !Number.isFinite(x)) missing.push(k);
    else values[k] = String(Number(x.toPrecision(4)));
  }
  return { values, missing, balanceTs: live.balance.ts, estimated: live.balance.quality !== 'good' };
}

export function useStormPrefill() {
  return useMutation({ mutationFn: fetchStormPrefill });
}
