/**
 * The demo plant: Kestrel Bend Water Reclamation Plant (code "kb"), a plant we invented for
 * the simulator. Two identical trains in the Modified Ludzack-Ettinger (MLE) layout: each one
 * activated-sludge basin (an unaerated anoxic zone baffled off at its inlet, then the aerated
 * zone) feeding one secondary clarifier, with one RAS and one WAS pump per clarifier. The
 * clarifier geometry equals the BSM1 settler (1500 m², 4 m, Alex et al. 2008) on purpose: the
 * simulator's clarifiers can then be checked against the published benchmark profile directly.
 *
 * Design basis per train (average dry-weather flow 770 m³/h, half the plant's 1540 m³/h):
 * - anoxic zone 1500 m³ (τ ≈ 1.9 h) ahead of the aerated 6000 m³ (τ ≈ 7.8 h): 20 % of the basin
 *   unaerated, aeratedFraction 0.8. Metcalf & Eddy, Wastewater Engineering, 5th ed. (2014),
 *   MLE design parameters: anoxic τ 1–3 h, aerobic τ 4–12 h, RAS 50–100 % of Q, internal
 *   recycle 2–4 Q [M: from memory; check the table]. The nitrate recycle and the RAS pass
 *   through both zones, so the solids are mixed over the whole basin: the simulator takes it
 *   as one completely mixed volume for solids, as the product's plant model takes one MLSS per
 *   basin (at steady state the anoxic zone's MLSS, (Q_R·X_R + Q_IR·X)/(Q + Q_R + Q_IR), equals
 *   the aerated zone's X exactly when Q_R·X_R = (Q + Q_R)·X).
 * - RAS pumps 1150 m³/h (≈ 150 % of the average train flow): the design storm of twice the
 *   average flow (1540 m³/h) needs R_min·Q = X/(X_R,max − X)·Q = 3.45/(8.37 − 3.45)·1540 ≈
 *   1080 m³/h with the plant's sludge (SVI 120 mL/g; X_R,max by flux theory at u = 0.77 m/h
 *   with Härtel & Pöpel 1992 settling, below the rule's 10 g/L), inside the installed capacity;
 *   and ratio control (RAS = Q) holds up to the dry-weather diurnal peak (≈ 1010 m³/h). The
 *   former 850 m³/h could not return the design storm's minimum (≈ 1110 m³/h at SVI 150). RAS
 *   capacity of 100–150 % of the average flow is the usual design range (WEF MOP 8 / Metcalf &
 *   Eddy [M: from memory]).
 * - Sludge: SVI 120 mL/g, the settling an anoxic zone ahead of the aeration (an anoxic
 *   selector) commonly gives against filamentous bulking (Jenkins, Richard & Daigger 2004,
 *   Manual on the Causes and Control of Activated Sludge Bulking [M: common practice]).
 *
 * Pure data, no I/O: the product seeds its database from this object and the simulator builds
 * its model, instruments, MQTT topics and OPC UA address space from it. Names are stable.
 *
 * Tag names use ISA-5.1 letters: F flow, A analysis, L level, Y state; I indicator, T
 * transmitter. Loop numbers: first digit the area (1 basins and headworks, 2 clarifiers,
 * 3 pumps, 4 outfall), second the measurement within the area, third the train.
 *
 * Signal kinds (`signal.kind`, what the tag measures; `signal.target` is the code of the
 * plant, basin, clarifier or pump it belongs to):
 *   plant.influentFlow      raw influent to the plant, m³/h               target: plant code
 *   plant.effluentFlow      treated effluent leaving the plant, m³/h      target: plant code
 *   basin.influentFlow      influent to one basin after the split (no RAS), m³/h  target: basin
 *   basin.mlss              mixed-liquor suspended solids, g/L            target: basin
 *   clarifier.blanketLevel  sludge-blanket top above the clarifier floor, m  target: clarifier
 *   clarifier.underflowTss  underflow (RAS/WAS) suspended solids, g/L     target: clarifier
 *   clarifier.effluentTss   clarifier effluent suspended solids, mg/L     target: clarifier
 *   pump.flow               pump discharge flow (RAS or WAS, see the pump), m³/h  target: pump
 *   pump.running            run feedback, 1 running / 0 stopped or tripped  target: pump
 */

export type SignalKind =
  | 'plant.influentFlow'
  | 'plant.effluentFlow'
  | 'basin.influentFlow'
  | 'basin.mlss'
  | 'clarifier.blanketLevel'
  | 'clarifier.underflowTss'
  | 'clarifier.effluentTss'
  | 'pump.flow'
  | 'pump.running';

export interface InstrumentSpec {
  /** Standard deviation of the measurement noise, engineering units. */
  noiseSd: number;
  /** First-order response time constant of the sensor and transmitter [s]. */
  lag_s: number;
  /** Smallest step the transmitter reports, engineering units. */
  resolution: number;
}

export interface DemoTag {
  name: string;
  description: string;
  unit: string;
  protocol: 'mqtt' | 'opcua';
  /** MQTT topic, or OPC UA NodeId string in the simulator's namespace (ns=1). */
  address: string;
  rangeLow: number;
  rangeHigh: number;
  /** Sample period of the transmitter [s] (simulated time). */
  expectedPeriod_s: number;
  signal: { kind: SignalKind; target: string };
  instrument: InstrumentSpec;
}

export interface DemoBasin {
  code: string;
  name: string;
  /** Whole basin, anoxic and aerated zones together [m³]. */
  volume_m3: number;
  /** Aerated share of the volume (the rest is the anoxic zone) [-]. */
  aeratedFraction: number;
}
export interface DemoClarifier { code: string; name: string; area_m2: number; sideWaterDepth_m: number; count: number }
export interface DemoPump { code: string; name: string; kind: 'ras' | 'was'; capacity_m3h: number; clarifier: string }
export interface DemoTrain { code: string; name: string; basins: DemoBasin[]; clarifiers: DemoClarifier[]; pumps: DemoPump[] }

export interface DemoPlant {
  name: string;
  code: string;
  trains: DemoTrain[];
  tags: DemoTag[];
}

function train(n: 1 | 2): DemoTrain {
  return {
    code: `t${n}`,
    name: `Train ${n}`,
    // 1500 m³ anoxic + 6000 m³ aerated (design basis above).
    basins: [{ code: `ab${n}`, name: `Activated-sludge basin ${n}`, volume_m3: 7500, aeratedFraction: 0.8 }],
    clarifiers: [{ code: `sc${n}`, name: `Secondary clarifier ${n}`, area_m2: 1500, sideWaterDepth_m: 4, count: 1 }],
    pumps: [
      // RAS capacity ≈ 1.5 × the average train flow: ratio control up to the diurnal peak, and
      // the minimum return of the design storm within it (design basis above).
      { code: `ras${n}`, name: `RAS pump ${n}`, kind: 'ras', capacity_m3h: 1150, clarifier: `sc${n}` },
      { code: `was${n}`, name: `WAS pump ${n}`, kind: 'was', capacity_m3h: 60, clarifier: `sc${n}` },
    ],
  };
}

function trainTags(n: 1 | 2): DemoTag[] {
  const t = `kb.train${n}`;
  return [
    {
      name: `FIT-11${n}`, description: `Basin ${n} influent flow`, unit: 'm3/h', protocol: 'opcua',
      address: `ns=1;s=${t}.FIT-11${n}`, rangeLow: 0, rangeHigh: 2500, expectedPeriod_s: 10,
      signal: { kind: 'basin.influentFlow', target: `ab${n}` }, instrument: { noiseSd: 4, lag_s: 3, resolution: 0.5 },
    },
    {
      name: `AIT-11${n}`, description: `Basin ${n} MLSS (optical probe, aerated zone)`, unit: 'g/L', protocol: 'mqtt',
      address: `kb/ab${n}/AIT-11${n}`, rangeLow: 0, rangeHigh: 10, expectedPeriod_s: 10,
      signal: { kind: 'basin.mlss', target: `ab${n}` }, instrument: { noiseSd: 0.03, lag_s: 30, resolution: 0.01 },
    },
    {
      name: `LIT-21${n}`, description: `Clarifier ${n} sludge blanket level above floor`, unit: 'm', protocol: 'opcua',
      address: `ns=1;s=${t}.LIT-21${n}`, rangeLow: 0, rangeHigh: 4, expectedPeriod_s: 60,
      signal: { kind: 'clarifier.blanketLevel', target: `sc${n}` }, instrument: { noiseSd: 0.03, lag_s: 60, resolution: 0.01 },
    },
    {
      name: `AIT-22${n}`, description: `Clarifier ${n} underflow (RAS) TSS`, unit: 'g/L', protocol: 'opcua',
      address: `ns=1;s=${t}.AIT-22${n}`, rangeLow: 0, rangeHigh: 20, expectedPeriod_s: 30,
      signal: { kind: 'clarifier.underflowTss', target: `sc${n}` }, instrument: { noiseSd: 0.08, lag_s: 30, resolution: 0.01 },
    },
    {
      name: `AIT-23${n}`, description: `Clarifier ${n} effluent TSS`, unit: 'mg/L', protocol: 'mqtt',
      address: `kb/sc${n}/AIT-23${n}`, rangeLow: 0, rangeHigh: 500, expectedPeriod_s: 30,
      signal: { kind: 'clarifier.effluentTss', target: `sc${n}` }, instrument: { noiseSd: 0.5, lag_s: 20, resolution: 0.1 },
    },
    {
      name: `FIT-31${n}`, description: `RAS pump ${n} flow`, unit: 'm3/h', protocol: 'mqtt',
      address: `kb/ras${n}/FIT-31${n}`, rangeLow: 0, rangeHigh: 1500, expectedPeriod_s: 5,
      signal: { kind: 'pump.flow', target: `ras${n}` }, instrument: { noiseSd: 3, lag_s: 2, resolution: 0.5 },
    },
    {
      name: `YI-31${n}`, description: `RAS pump ${n} running`, unit: 'state', protocol: 'opcua',
      address: `ns=1;s=${t}.YI-31${n}`, rangeLow: 0, rangeHigh: 1, expectedPeriod_s: 5,
      signal: { kind: 'pump.running', target: `ras${n}` }, instrument: { noiseSd: 0, lag_s: 0, resolution: 1 },
    },
    {
      name: `FIT-32${n}`, description: `WAS pump ${n} flow`, unit: 'm3/h', protocol: 'opcua',
      address: `ns=1;s=${t}.FIT-32${n}`, rangeLow: 0, rangeHigh: 80, expectedPeriod_s: 10,
      signal: { kind: 'pump.flow', target: `was${n}` }, instrument: { noiseSd: 0.2, lag_s: 2, resolution: 0.1 },
    },
  ];
}

export const DEMO_PLANT: DemoPlant = {
  name: 'Kestrel Bend Water Reclamation Plant',
  code: 'kb',
  trains: [train(1), train(2)],
  tags: [
    {
      name: 'FIT-101', description: 'Plant influent flow', unit: 'm3/h', protocol: 'mqtt',
      address: 'kb/hw/FIT-101', rangeLow: 0, rangeHigh: 5000, expectedPeriod_s: 5,
      signal: { kind: 'plant.influentFlow', target: 'kb' }, instrument: { noiseSd: 8, lag_s: 3, resolution: 1 },
    },
    ...trainTags(1),
    ...trainTags(2),
    {
      name: 'FIT-401', description: 'Plant effluent flow', unit: 'm3/h', protocol: 'opcua',
      address: 'ns=1;s=kb.plant.FIT-401', rangeLow: 0, rangeHigh: 5000, expectedPeriod_s: 10,
      signal: { kind: 'plant.effluentFlow', target: 'kb' }, instrument: { noiseSd: 8, lag_s: 5, resolution: 1 },
    },
  ],
};
