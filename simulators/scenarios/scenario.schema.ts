/**
 * Scenario files (simulators/scenarios/*.json): what happens to the invented plant over
 * simulated time. Times are hours since the simulation started; flows are plant totals in
 * m³/h unless the field says per train; concentrations in g/L (BOD in g/m³, as labs report it).
 */
import { z } from 'zod';

const nonNeg = z.number().finite().min(0);
const pos = z.number().finite().positive();

/** A scheduled rain event: the influent rises to `multiplier` × the dry-weather average. */
export const stormEvent = z
  .object({
    start_h: nonNeg,
    duration_h: pos,
    /** Hours to rise from dry weather to the peak (linear). */
    rise_h: nonNeg.default(0.5),
    /** Time constant of the exponential recession after the event [h]. */
    recession_h: nonNeg.default(1),
    /** Peak influent as a multiple of the dry-weather average flow (2 = "doubles"). */
    multiplier: z.number().finite().min(1).max(6),
  })
  .strict();

/** Random showers drawn from the seeded generator (Poisson arrivals). */
export const randomRain = z
  .object({
    meanInterval_h: pos,
    meanDuration_h: pos,
    multiplierMin: z.number().finite().min(1),
    multiplierMax: z.number().finite().min(1),
  })
  .strict()
  .refine((r) => r.multiplierMax >= r.multiplierMin, { message: 'multiplierMax must be ≥ multiplierMin', path: ['multiplierMax'] });

export const sviChange = z.object({ at_h: nonNeg, to_mLg: z.number().finite().min(30).max(600), over_h: nonNeg }).strict();

export const pumpTrip = z.object({ pump: z.string().min(1), at_h: nonNeg, duration_h: pos }).strict();

export const wasControl = z.discriminatedUnion('mode', [
  /** Continuous wasting at a flow set point per train [m³/h]. */
  z.object({ mode: z.literal('flow'), flowPerTrain_m3h: nonNeg }).strict(),
  /** Timer wasting: the WAS pump runs at flowPerTrain_m3h for on_min minutes every period_min minutes. */
  z.object({ mode: z.literal('timer'), flowPerTrain_m3h: nonNeg, on_min: pos, period_min: pos }).strict(),
]);

export const faultKind = z.enum(['flatline', 'dropout', 'spike', 'bad', 'skew', 'drift']);

/**
 * An instrument fault: flatline (the transmitter freezes at its last value), dropout (nothing
 * is sent), spike (one sample off by `magnitude` engineering units), bad (quality flag bad, value
 * withheld), skew (source timestamps shifted by `magnitude` seconds), drift (a fouling probe: the
 * reading sinks by `magnitude` × 100 % per hour of the fault, floored at zero).
 */
export const faultSpec = z
  .object({ tag: z.string().min(1), kind: faultKind, at_h: nonNeg, duration_h: pos, magnitude: z.number().finite().optional() })
  .strict();

export const scenarioSchema = z
  .object({
    name: z.string().regex(/^[a-z0-9-]+$/, 'scenario names are kebab-case'),
    description: z.string().min(1),
    /** Speed the scenario is meant to be watched at (1 = real time), used when the CLI gets none. */
    recommendedSpeed: z.number().finite().min(1).max(3600).default(1),
    initial: z.object({ mlss_gL: z.number().finite().min(0.5).max(10) }).strict(),
    influent: z
      .object({
        averageFlow_m3h: pos,
        /** Amplitudes (fractions of the average) and phase of the daily and half-daily harmonics. */
        diurnal: z
          .object({ amplitude: z.number().min(0).max(0.6), secondAmplitude: z.number().min(0).max(0.3), peakHour: z.number().min(0).max(24) })
          .strict(),
        bod_gm3: pos,
        /** BOD of the rain water added during storms (dilute) [g/m³]. */
        stormBod_gm3: nonNeg.default(40),
        /** Slow random variation: first-order (AR(1)) noise with this standard deviation (fraction) and correlation time. */
        noise: z.object({ sd: z.number().min(0).max(0.3), tau_h: pos }).strict().default({ sd: 0.03, tau_h: 1 }),
        storms: z.array(stormEvent).default([]),
        randomRain: randomRain.nullable().default(null),
      })
      .strict(),
    svi: z.object({ initial_mLg: z.number().finite().min(30).max(600), changes: z.array(sviChange).default([]) }).strict(),
    /** Observed net sludge yield [g TSS per g BOD removed]. */
    yield_gTSSgBOD: z.number().finite().min(0).max(1.5).default(0.6),
    ras: z
      .object({
        /** Ratio control: Q_R set point = ratio × train influent, limited by the pump capacity. */
        ratio: z.number().finite().min(0).max(3),
        minFlowPerTrain_m3h: nonNeg.default(100),
        trips: z.array(pumpTrip).default([]),
      })
      .strict(),
    was: wasControl,
    faults: z.array(faultSpec).default([]),
  })
  .strict();

export type Scenario = z.infer<typeof scenarioSchema>;
export type ScenarioInput = z.input<typeof scenarioSchema>;
export type StormEvent = z.infer<typeof stormEvent>;
export type FaultSpec = z.infer<typeof faultSpec>;
export type FaultKind = z.infer<typeof faultKind>;
export type WasControl = z.infer<typeof wasControl>;
