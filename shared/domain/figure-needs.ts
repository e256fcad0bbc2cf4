/**
 * What each figure of a train's balance needs, and which of those inputs a plant is missing:
 * the setup view's answer to "why is this figure unavailable?" before any value arrives. It
 * follows the inputs the balance assembly reads (shared/domain/balance/assemble.ts): geometry
 * from the model, live values from the signal map, the settleability from the lab.
 */
import type { SignalKindName } from '../contracts/plant-layout.js';

export type FigureName = 'aerationInventory' | 'clarifierInventory' | 'rasMargin' | 'stormProjection' | 'srt';

export const FIGURE_LABELS: Record<FigureName, string> = {
  aerationInventory: 'aeration inventory',
  clarifierInventory: 'clarifier inventory',
  rasMargin: 'RAS margin',
  stormProjection: 'storm projection',
  srt: 'SRT and WAS advice',
};

export interface NeedsModel {
  peakFlow_m3h: number | null;
  trains: Array<{
    id: number;
    code: string;
    basins: Array<{ id: number; code: string; volume_m3: number; inService: boolean }>;
    clarifiers: Array<{ id: number; code: string; area_m2: number; sideWaterDepth_m: number; inService: boolean }>;
    pumps: Array<{ id: number; code: string; kind: 'ras' | 'was'; inService: boolean }>;
  }>;
}

export interface NeedsMapping {
  signal: SignalKindName;
  targetType: 'plant' | 'train' | 'basin' | 'clarifier' | 'pump';
  targetId: number;
}

export interface Need {
  /** What is needed, in plain words ("clarifier area", "MLSS of ab1"). */
  input: string;
  source: 'model' | 'signal' | 'lab' | 'plant';
  present: boolean;
  /** A missing input the figure can do without (then it is estimated, not unavailable). */
  optional?: boolean;
}

export interface FigureNeeds {
  figure: FigureName;
  train: string;
  needs: Need[];
  /** Required inputs that are missing (the figure is unavailable until they are there). */
  missing: string[];
}

/**
 * Per train and figure, the inputs it needs and whether the plant has them. `hasSvi` is whether
 * the lab holds a settleability test (null: not known here, then it is listed as present).
 * Units out of service are left out, as the balance leaves them out.
 */
export function figureNeeds(model: NeedsModel, mappings: readonly NeedsMapping[], hasSvi: boolean | null): FigureNeeds[] {
  const mapped = (signal: SignalKindName, type: NeedsMapping['targetType'], id: number) => mappings.some((m) => m.signal === signal && m.targetType === type && m.targetId === id);
  const out: FigureNeeds[] = [];
  for (const t of model.trains) {
    const basins = t.basins.filter((b) => b.inService);
    const clarifiers = t.clarifiers.filter((c) => c.inService);
    const ras = t.pumps.filter((p) => p.inService && p.kind === 'ras');
    const was = t.pumps.filter((p) => p.inService && p.kind === 'was');

    const basinVolume: Need = { input: 'an aeration basin with a volume', source: 'model', present: basins.some((b) => b.volume_m3 > 0) };
    const clarifierArea: Need = { input: 'a clarifier area', source: 'model', present: clarifiers.some((c) => c.area_m2 > 0) };
    // The train influent is the sum of its basins' meters, else the plant meter split by volume.
    const influent: Need = {
      input: 'influent flow (basin or plant meter)',
      source: 'signal',
      present: (basins.length > 0 && basins.every((b) => mapped('basin.influentFlow', 'basin', b.id))) || mappings.some((m) => m.signal === 'plant.influentFlow'),
    };
    const mlss: Need = { input: 'MLSS of a basin', source: 'signal', present: basins.some((b) => mapped('basin.mlss', 'basin', b.id)) };
    const rasPump: Need = { input: 'a RAS pump', source: 'model', present: ras.length > 0 };
    const rasFlow: Need = { input: 'RAS flow of every RAS pump', source: 'signal', present: ras.length > 0 && ras.every((p) => mapped('pump.flow', 'pump', p.id)) };
    const wasFlow: Need = { input: 'WAS flow of every WAS pump', source: 'signal', present: was.length > 0 && was.every((p) => mapped('pump.flow', 'pump', p.id)) };
    const underflow: Need = { input: 'underflow TSS of a clarifier', source: 'signal', present: clarifiers.some((c) => mapped('clarifier.underflowTss', 'clarifier', c.id)) };
    const svi: Need = { input: 'an SVI or DSVI in the lab results', source: 'lab', present: hasSvi ?? true };

    const add = (figure: FigureName, needs: Need[]) => out.push({ figure, train: t.code, needs, missing: needs.filter((n) => !n.present && !n.optional).map((n) => n.input) });
    add('aerationInventory', [basinVolume, mlss]);
    add('clarifierInventory', [
      clarifierArea,
      { input: 'sludge blanket level of every clarifier', source: 'signal', present: clarifiers.length > 0 && clarifiers.every((c) => mapped('clarifier.blanketLevel', 'clarifier', c.id)) },
      underflow,
    ]);
    // The RAS limits come from the SVI (X_R,max), not from the measured underflow.
    add('rasMargin', [rasPump, rasFlow, influent, mlss, svi]);
    add('stormProjection', [
      clarifierArea,
      basinVolume,
      influent,
      rasFlow,
      mlss,
      svi,
      // Without it the storm flow is the peak-flow factor × the mean influent (estimated).
      { input: 'peak wet-weather flow of the plant', source: 'plant', present: model.peakFlow_m3h !== null && model.peakFlow_m3h > 0, optional: true },
    ]);
    add('srt', [
      basinVolume,
      mlss,
      { input: 'a WAS pump', source: 'model', present: was.length > 0 },
      wasFlow,
      underflow,
      { input: 'effluent TSS of a clarifier', source: 'signal', present: clarifiers.some((c) => mapped('clarifier.effluentTss', 'clarifier', c.id)), optional: true },
    ]);
  }
  return out;
}

/** One line per figure that cannot be computed: "the storm projection of train t2 needs a clarifier area". */
export function missingSentences(needs: readonly FigureNeeds[]): string[] {
  return needs.filter((f) => f.missing.length).map((f) => `the ${FIGURE_LABELS[f.figure]} of train ${f.train} needs ${f.missing.join(', ')}`);
}
