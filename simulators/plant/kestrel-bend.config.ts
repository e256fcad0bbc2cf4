import { labResultInput, type LabResultInput } from '../../shared/contracts/lab.ts';
import { plantConfig, type PlantConfig } from '../../shared/contracts/plant-config.ts';
import { DEMO_PLANT } from './demo-plant.ts';

export interface DemoEndpoints {
  /** The broker the simulator publishes to (the embedded one on `npm start`). */
  mqttUrl: string;
  /** The simulator's OPC UA endpoint. */
  opcuaUrl: string;
}

/** Source names of the demo plant (their URLs change per run: the ports are chosen at start). */
export const DEMO_SOURCE_NAMES = { mqtt: `${DEMO_PLANT.code}-mqtt`, opcua: `${DEMO_PLANT.code}-opcua` } as const;

/**
 * Kestrel Bend as a plant configuration document (format 1, shared/contracts/plant-config.ts):
 * what `npm start` posts through the same service as `POST /api/v1/plants`, so the demo uses
 * exactly the path a real install uses. Built from DEMO_PLANT, the simulator's own description,
 * so the plant the product knows and the plant the simulator runs cannot drift apart; validated
 * by the shared schema here.
 */
export function kestrelBendConfig(ep: DemoEndpoints): PlantConfig {
  return plantConfig.parse({
    formatVersion: 1,
    plant: { code: DEMO_PLANT.code, name: DEMO_PLANT.name, timezone: 'UTC', peakFlow_m3h: null, unitSystem: 'SI' },
    model: {
      trains: DEMO_PLANT.trains.map((t) => ({
        code: t.code,
        name: t.name,
        aerationBasins: t.basins.map((b) => ({ code: b.code, name: b.name, volume_m3: b.volume_m3, aeratedFraction: b.aeratedFraction })),
        secondaryClarifiers: t.clarifiers.map((c) => ({ code: c.code, name: c.name, area_m2: c.area_m2, sideWaterDepth_m: c.sideWaterDepth_m, count: c.count })),
        pumps: t.pumps.map((p) => ({ code: p.code, name: p.name, kind: p.kind, capacity_m3h: p.capacity_m3h, servesClarifier: p.clarifier })),
      })),
    },
    // The plant's own SRT target: wasting 11 m³/h per train holds about 15 d total SRT (basins
    // and blankets) with about 12 d in the aerated zones, above the 8–10 d a nitrifying MLE plant
    // is commonly designed for in winter [M: from memory, Metcalf & Eddy 5th ed.].
    settings: { 'srt.target_d': 15 },
    sources: [
      { kind: 'mqtt', name: DEMO_SOURCE_NAMES.mqtt, url: ep.mqttUrl },
      { kind: 'opcua', name: DEMO_SOURCE_NAMES.opcua, url: ep.opcuaUrl, options: { securityMode: 'None' } },
    ],
    tags: DEMO_PLANT.tags.map((t) => ({
      name: t.name,
      source: t.protocol === 'mqtt' ? DEMO_SOURCE_NAMES.mqtt : DEMO_SOURCE_NAMES.opcua,
      address: t.address,
      unit: t.unit,
      description: t.description,
      rangeLow: t.rangeLow,
      rangeHigh: t.rangeHigh,
      expectedPeriod_s: t.expectedPeriod_s,
      // One second: the simulator may run faster than real time, and the server's data-change
      // filter only reports changes anyway.
      samplingInterval_ms: t.protocol === 'opcua' ? 1000 : null,
      // A run-feedback state holds still by nature: never checked for a flat line.
      kind: t.signal.kind === 'pump.running' ? ('state' as const) : ('analog' as const),
    })),
    signalMap: DEMO_PLANT.tags.map((t) => {
      const type = t.signal.kind.split('.')[0] as 'plant' | 'basin' | 'clarifier' | 'pump';
      return { signal: t.signal.kind, target: { type, code: type === 'plant' ? null : t.signal.target }, tag: t.name };
    }),
  });
}

/**
 * The demo's settleability test, a lab entry rather than a tag: one diluted test as an operator
 * would have entered it three hours before `now_ms` — 207 mL/L at 1:2 with MLSS 3.45 g/L,
 * DSVI = 207 × 2 / 3.45 = 120 mL/g, the sludge of the demo's history and scenario — so the RAS
 * limit has an SVI to work from at the first start.
 */
export function kestrelBendLabEntry(now_ms: number): LabResultInput {
  return labResultInput.parse({ kind: 'DSVI', settledVolume_mLL: 207, dilutionFactor: 2, mlss_gL: 3.45, location: DEMO_PLANT.trains[0]!.basins[0]!.code, sampledAt: new Date(now_ms - 3 * 3600_000).toISOString(), note: 'demo entry' });
}
