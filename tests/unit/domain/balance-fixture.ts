import { defaultSettings } from '../../../shared/contracts/settings.ts';
import type { BalanceEngineInputs, SeriesPoint, SignalReading } from '../../../shared/domain/balance/inputs.ts';

/**
 * A one-train plant with steady signals, for hand-computed balances:
 * basin 6000 m³ (as one Kestrel Bend basin), clarifier 1500 m², 4 m deep (the BSM1 settler
 * geometry), RAS pump 850 m³/h, WAS pump 60 m³/h; Q = 800 m³/h, Q_R = 600 m³/h,
 * Q_W = 20 m³/h, MLSS 3.0 g/L, underflow 8.0 g/L, effluent 10 mg/L, blanket 1.0 m, SVI 120 mL/g.
 */
export const NOW = Date.parse('2026-03-02T12:00:00Z');
export const SIG = {
  q: { tagId: 1, tag: 'FIT-111', signal: 'basin.influentFlow', targetType: 'basin', targetId: 10, unit: 'm3/h', value: 800, expectedPeriod_s: 10 },
  x: { tagId: 2, tag: 'AIT-111', signal: 'basin.mlss', targetType: 'basin', targetId: 10, unit: 'g/L', value: 3.0, expectedPeriod_s: 10 },
  lv: { tagId: 3, tag: 'LIT-211', signal: 'clarifier.blanketLevel', targetType: 'clarifier', targetId: 20, unit: 'm', value: 1.0, expectedPeriod_s: 60 },
  xr: { tagId: 4, tag: 'AIT-221', signal: 'clarifier.underflowTss', targetType: 'clarifier', targetId: 20, unit: 'g/L', value: 8.0, expectedPeriod_s: 30 },
  xe: { tagId: 5, tag: 'AIT-231', signal: 'clarifier.effluentTss', targetType: 'clarifier', targetId: 20, unit: 'mg/L', value: 10, expectedPeriod_s: 30 },
  qr: { tagId: 6, tag: 'FIT-311', signal: 'pump.flow', targetType: 'pump', targetId: 30, unit: 'm3/h', value: 600, expectedPeriod_s: 5 },
  qw: { tagId: 7, tag: 'FIT-321', signal: 'pump.flow', targetType: 'pump', targetId: 31, unit: 'm3/h', value: 20, expectedPeriod_s: 10 },
} as const satisfies Record<string, Omit<SignalReading, 'qualityCode' | 'ts_ms' | 'receivedAt_ms'>>;
export type SigName = keyof typeof SIG;

export function fixtureInputs(opts: { peakFlow_m3h?: number | null; svi?: number | null; override?: Partial<Record<SigName, Partial<SignalReading> | null>>; hours?: number } = {}): BalanceEngineInputs {
  const readings: SignalReading[] = [];
  const series = new Map<number, SeriesPoint[]>();
  const hours = opts.hours ?? 24;
  for (const [name, s] of Object.entries(SIG) as [SigName, (typeof SIG)[SigName]][]) {
    const o = opts.override?.[name];
    if (o === null) continue;
    const r: SignalReading = { ...s, qualityCode: 0, ts_ms: NOW - 1000, receivedAt_ms: NOW - 1000, ...o };
    readings.push(r);
    const pts: SeriesPoint[] = [];
    for (let m = 0; m <= hours * 60; m++) pts.push({ t_ms: NOW - 1000 - m * 60_000, mean: s.value, qualityCode: 0 });
    series.set(s.tagId, pts.reverse());
  }
  return {
    now_ms: NOW,
    layout: {
      plantId: 1,
      code: 'fx',
      peakFlow_m3h: opts.peakFlow_m3h === undefined ? 1600 : opts.peakFlow_m3h,
      trains: [
        {
          id: 5,
          code: 't1',
          basins: [{ id: 10, code: 'ab1', volume_m3: 6000 }],
          clarifiers: [{ id: 20, code: 'sc1', area_m2: 1500, sideWaterDepth_m: 4, count: 1 }],
          pumps: [
            { id: 30, code: 'ras1', kind: 'ras', capacity_m3h: 850 },
            { id: 31, code: 'was1', kind: 'was', capacity_m3h: 60 },
          ],
        },
      ],
    },
    readings,
    series,
    svi: opts.svi === null ? null : { kind: 'SVI', value_mLg: opts.svi ?? 120, sampledAt_ms: NOW - 3_600_000, flags: [] },
    lastReceived_ms: NOW - 1000,
  };
}

export const settings = () => defaultSettings();
