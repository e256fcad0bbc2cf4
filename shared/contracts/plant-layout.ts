import { z } from 'zod';

/**
 * A plant's layout as the seeder and the admin import take it: trains with basins, clarifiers
 * and pumps, and its tags with the process signal each one is. Signal kinds:
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

const code = z.string().regex(/^[a-z0-9][a-z0-9_-]{0,31}$/, 'lower-case letters, digits, - or _');
const pos = z.number().positive();

export const plantLayout = z.object({
  name: z.string().min(1).max(120),
  code,
  peakFlow_m3h: pos.optional(),
  trains: z
    .array(
      z.object({
        code,
        name: z.string().min(1),
        basins: z.array(z.object({ code, name: z.string().min(1), volume_m3: pos })).min(1),
        clarifiers: z.array(z.object({ code, name: z.string().min(1), area_m2: pos, sideWaterDepth_m: pos, count: z.number().int().positive().default(1) })).min(1),
        pumps: z.array(z.object({ code, name: z.string().min(1), kind: z.enum(['ras', 'was']), capacity_m3h: pos })),
      }),
    )
    .min(1),
  tags: z.array(
    z.object({
      name: z.string().min(1).max(64),
      description: z.string().max(200).default(''),
      unit: z.string().min(1).max(16),
      protocol: z.enum(['mqtt', 'opcua']),
      address: z.string().min(1).max(512),
      rangeLow: z.number(),
      rangeHigh: z.number(),
      expectedPeriod_s: pos,
      signal: z.object({ kind: signalKind, target: code }).optional(),
    }),
  ),
});
export type PlantLayout = z.input<typeof plantLayout>;
