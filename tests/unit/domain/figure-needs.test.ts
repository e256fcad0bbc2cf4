import { describe, expect, it } from 'vitest';
import { defaultSettings } from '../../../shared/contracts/settings.ts';
import { computeBalance } from '../../../shared/domain/balance/assemble.ts';
import type { BalanceEngineInputs } from '../../../shared/domain/balance/inputs.ts';
import { figureNeeds, missingSentences, type NeedsModel } from '../../../shared/domain/figure-needs.ts';
import { fixtureInputs, type SigName } from './balance-fixture.ts';

/**
 * The helper must agree with the balance assembly: whatever it reports missing for a figure, the
 * assembly computes that figure as unavailable, and a complete plant has nothing missing and a
 * computed figure. Checked on the one-train fixture (tests/unit/domain/balance-fixture.ts) with
 * one input taken away at a time.
 */
function modelOf(inp: BalanceEngineInputs): NeedsModel {
  return {
    peakFlow_m3h: inp.layout.peakFlow_m3h,
    trains: inp.layout.trains.map((t) => ({
      id: t.id,
      code: t.code,
      basins: t.basins.map((b) => ({ ...b, inService: true })),
      clarifiers: t.clarifiers.map((c) => ({ ...c, inService: true })),
      pumps: t.pumps.map((p) => ({ ...p, inService: true })),
    })),
  };
}
const needsOf = (inp: BalanceEngineInputs) => figureNeeds(modelOf(inp), inp.readings, inp.svi !== null);
const missingFor = (inp: BalanceEngineInputs, figure: string) => needsOf(inp).find((f) => f.figure === figure)!.missing;
const storm = (inp: BalanceEngineInputs) => computeBalance(inp, defaultSettings()).data.trains[0]!.storm.blanketRise_m.quality;
const clarifierMass = (inp: BalanceEngineInputs) => computeBalance(inp, defaultSettings()).data.clarifiers[0]!.blanketMass_kg.quality;
const ras = (inp: BalanceEngineInputs) => computeBalance(inp, defaultSettings()).data.trains[0]!.ras.minRasFlow_m3h.quality;

describe('figureNeeds', () => {
  it('a complete plant needs nothing more, and the assembly computes the figures', () => {
    const inp = fixtureInputs();
    expect(needsOf(inp).flatMap((f) => f.missing)).toEqual([]);
    expect(missingSentences(needsOf(inp))).toEqual([]);
    expect(storm(inp)).toBe('good');
    expect(ras(inp)).toBe('good');
  });

  it.each<[SigName, string, string]>([
    ['x', 'stormProjection', 'MLSS of a basin'],
    ['qr', 'stormProjection', 'RAS flow of every RAS pump'],
    ['q', 'stormProjection', 'influent flow (basin or plant meter)'],
    ['xr', 'clarifierInventory', 'underflow TSS of a clarifier'],
    ['lv', 'clarifierInventory', 'sludge blanket level of every clarifier'],
  ])('an unmapped %s: the helper names it and the assembly cannot compute the figure', (sig, figure, input) => {
    const inp = fixtureInputs({ override: { [sig]: null } });
    expect(missingFor(inp, figure)).toContain(input);
    expect(figure === 'stormProjection' ? storm(inp) : clarifierMass(inp)).toBe('unavailable');
  });

  it('no SVI in the lab: RAS margin and storm projection say so, and are unavailable', () => {
    const inp = fixtureInputs({ svi: null });
    expect(missingFor(inp, 'stormProjection')).toEqual(['an SVI or DSVI in the lab results']);
    expect(storm(inp)).toBe('unavailable');
    expect(ras(inp)).toBe('unavailable');
  });

  it('no peak flow is optional: the storm projection is still computed (estimated from the factor)', () => {
    const inp = fixtureInputs({ peakFlow_m3h: null });
    expect(missingFor(inp, 'stormProjection')).toEqual([]);
    expect(needsOf(inp).find((f) => f.figure === 'stormProjection')!.needs.find((n) => n.source === 'plant')!.present).toBe(false);
    expect(storm(inp)).toBe('estimated');
  });

  it('a train whose only clarifier is out of service: "the storm projection of train t2 needs a clarifier area"', () => {
    const m = modelOf(fixtureInputs());
    const t2 = { ...m.trains[0]!, id: 6, code: 't2', clarifiers: m.trains[0]!.clarifiers.map((c) => ({ ...c, id: 21, inService: false })) };
    const out = missingSentences(figureNeeds({ ...m, trains: [m.trains[0]!, t2] }, fixtureInputs().readings, true));
    expect(out).toContain('the storm projection of train t2 needs a clarifier area');
    expect(out.some((s) => s.includes('train t1'))).toBe(false);
  });
});
