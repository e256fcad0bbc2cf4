import { z } from 'zod';

/**
 * The process signals a tag can be mapped to (signal map, configuration documents). Signal kinds:
 *   plant.influentFlow, plant.effluentFlow [m³/h]; basin.influentFlow [m³/h]; basin.mlss [g/L];
 *   clarifier.blanketLevel [m above floor]; clarifier.underflowTss [g/L]; clarifier.effluentTss [mg/L];
 *   pump.flow [m³/h]; pump.running [1/0].
 */
export const SIGNAL_KINDS = [
  'plant.influentFlow',
  'plant.effluentFlow',
  'basin.influentFlow',
  'basin.mlss',
  'clarifier.blanketLevel',
  'clarifier.underflowTss',
  'clarifier.effluentTss',
  'pump.flow',
  'pump.running',
] as const;
export const signalKind = z.enum(SIGNAL_KINDS);
export type SignalKindName = z.infer<typeof signalKind>;
