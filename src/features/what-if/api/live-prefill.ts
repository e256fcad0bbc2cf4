import { useMutation } from '@tanstack/react-query';
import type { BalanceData, FigureOut } from '../../../../shared/contracts/balance.ts';
import { api } from '../../../lib/api-client.ts';
import type { BalanceLive } from '../../board/api/balance-live.ts';
import { paths } from '../../../lib/paths.ts';

/** A calculator form's inputs taken from the plant's latest balance, with what could not be filled. */
export interface LivePrefill {
  values: Record<string, string>;
  missing: string[];
  balanceTs: string;
  estimated: boolean;
}

/** The calculators that can be filled from the plant. */
export type PrefillForm = 'storm' | 'statePoint' | 'srt' | 'settler';

const sum = (xs: Array<number | null>): number | null => (xs.some((x) => x === null) ? null : xs.reduce<number>((a, b) => a + (b ?? 0), 0));
/** Σ wᵢxᵢ / Σ wᵢ; null when any x is missing or the weights add to nothing. */
const weighted = (xs: Array<{ x: number | null; w: number }>): number | null => {
  const w = xs.reduce((a, b) => a + b.w, 0);
  const m = sum(xs.map((e) => (e.x === null ? null : e.x * e.w)));
  return m === null || w === 0 ? null : m / w;
};

/**
 * The whole plant as each calculator sees it, from one balance (pure). The balance holds the
 * units in service only, so an out-of-service clarifier adds no area.
 * - Flows are summed over the trains; MLSS is the volume-weighted mean over the basins.
 * - Clarifier area is the total in service; underflow (= WAS) and effluent TSS are the
 *   area-weighted means over the clarifiers (the feed is split by area where not measured).
 * - Effluent flow is influent minus WAS flow, the plant's water balance at steady state,
 *   Q_e = Q − Q_W (common practice), for SRT = mass / (Q_W·X_W + Q_e·X_e).
 * - The storm flow is the plant's peak flow; the clarifier mass is the blanket inventory.
 * - The layered settler is fed Q + Q_R at the MLSS and drawn Q_R + Q_W at the underflow, over
 *   the area in service at its area-weighted side water depth (layers and feed layer stay).
 */
export function prefillValues(d: BalanceData): Record<PrefillForm, Record<string, number | null>> {
  const v = (f: FigureOut | undefined) => (f && f.quality !== 'unavailable' ? f.value : null);
  const volume = d.basins.reduce((a, b) => a + b.volume_m3, 0);
  const mlss = weighted(d.basins.map((b) => ({ x: v(b.mlss_gL), w: b.volume_m3 })));
  const area = d.clarifiers.reduce((a, c) => a + c.area_m2, 0);
  const influent = sum(d.trains.map((t) => v(t.influentFlow_m3h)));
  const ras = sum(d.trains.map((t) => v(t.rasFlow_m3h)));
  const was = sum(d.trains.map((t) => v(t.wasFlow_m3h)));
  const svi = v(d.settleability.svi_mLg);
  return {
    storm: {
      influentFlow_m3h: influent,
      rasFlow_m3h: ras,
      mlss_gL: mlss,
      svi_mLg: svi,
      aerationVolume_m3: volume || null,
      clarifierArea_m2: area || null,
      stormFlow_m3h: v(d.storm.peakFlow_m3h),
      clarifierMass_kg: v(d.inventory.clarifierMass_kg),
    },
    statePoint: {
      influentFlow_m3h: influent,
      rasFlow_m3h: ras,
      wasFlow_m3h: was,
      mlss_gL: mlss,
      clarifierArea_m2: area || null,
      'settling.svi_mLg': svi,
    },
    srt: {
      aerationMass_kg: v(d.inventory.aerationMass_kg),
      clarifierMass_kg: v(d.inventory.clarifierMass_kg),
      wasFlow_m3h: was,
      wasTss_gL: weighted(d.clarifiers.map((c) => ({ x: v(c.underflowTss_gL), w: c.area_m2 }))),
      effluentFlow_m3h: influent === null || was === null ? null : influent - was,
      effluentTss_gL: weighted(d.clarifiers.map((c) => ({ x: v(c.effluentTss_gL), w: c.area_m2 }))),
      targetSrt_d: d.srt.target_d,
    },
    settler: {
      feedFlow_m3h: influent === null || ras === null ? null : influent + ras,
      feedTss_gL: mlss,
      underflowFlow_m3h: ras === null || was === null ? null : ras + was,
      area_m2: area || null,
      depth_m: weighted(d.clarifiers.map((c) => ({ x: c.sideWaterDepth_m, w: c.area_m2 }))),
    },
  };
}

/** Form text for each value (4 significant digits), and the fields left as they were. */
export function toFormValues(figures: Record<string, number | null>): { values: Record<string, string>; missing: string[] } {
  const values: Record<string, string> = {};
  const missing: string[] = [];
  for (const [k, x] of Object.entries(figures)) {
    if (x === null || !Number.isFinite(x)) missing.push(k);
    else values[k] = String(Number(x.toPrecision(4)));
  }
  return { values, missing };
}

/** Reads the plant's live balance and turns it into one calculator's inputs. */
export async function fetchLivePrefill(plantId: number, form: PrefillForm): Promise<LivePrefill> {
  const live = await api<Omit<BalanceLive, 'receivedAt'>>(paths.balanceLive(plantId));
  if (!live.balance) throw new Error(live.reason ?? 'no balance computed yet for this plant');
  return { ...toFormValues(prefillValues(live.balance.data)[form]), balanceTs: live.balance.ts, estimated: live.balance.quality !== 'good' };
}

export function useLivePrefill(form: PrefillForm) {
  return useMutation({ mutationFn: (plantId: number) => fetchLivePrefill(plantId, form) });
}
