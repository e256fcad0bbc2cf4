import { describe, expect, it } from 'vitest';
import { seedDemoPlant } from '../helpers/plants.ts';
import { E2E_ADMIN, serverAndBrowser, shot, watchConsole, signIn } from '../helpers/browser.ts';

const fig = (value: number | null, unit: string) => ({ value, unit, quality: value === null ? 'unavailable' : 'good', reasons: value === null ? ['no input'] : [] });

describe('what-if pre-filled from the live plant', () => {
  const suite = serverAndBrowser();

  it('fills the storm, state point, sludge-age and settler forms from the latest balance of the invented demo plant', async () => {
    const { plantId } = await seedDemoPlant(suite.env.server.ctx, { mqttUrl: 'mqtt://127.0.0.1:1', opcuaUrl: 'opc.tcp://127.0.0.1:1/x' });
    // A balance as the engine stores it (only the figures the form reads are set here):
    // two trains of 1 600 and 1 500 m³/h, RAS 850 + 840 m³/h, WAS 12 + 10 m³/h, basins of 6 000 m³
    // at 3.0 and 3.2 g/L, two clarifiers of 1 500 m² in service.
    const data = {
      basins: [
        { code: 'ab1', train: 't1', volume_m3: 6000, mlss_gL: fig(3.0, 'g/L'), mass_kg: fig(18000, 'kg') },
        { code: 'ab2', train: 't2', volume_m3: 6000, mlss_gL: fig(3.2, 'g/L'), mass_kg: fig(19200, 'kg') },
      ],
      clarifiers: [
        { code: 'sc1', train: 't1', area_m2: 1500, sideWaterDepth_m: 4.5, underflowTss_gL: fig(7.5, 'g/L'), effluentTss_gL: fig(0.012, 'g/L') },
        { code: 'sc2', train: 't2', area_m2: 1500, sideWaterDepth_m: 4.5, underflowTss_gL: fig(8.5, 'g/L'), effluentTss_gL: fig(0.008, 'g/L') },
      ],
      trains: [
        { code: 't1', influentFlow_m3h: fig(1600, 'm3/h'), rasFlow_m3h: fig(850, 'm3/h'), wasFlow_m3h: fig(12, 'm3/h') },
        { code: 't2', influentFlow_m3h: fig(1500, 'm3/h'), rasFlow_m3h: fig(840, 'm3/h'), wasFlow_m3h: fig(10, 'm3/h') },
      ],
      settleability: { svi_mLg: fig(150, 'mL/g'), kind: 'DSVI', sampledAt: new Date().toISOString() },
      storm: { peakFlow_m3h: fig(6200, 'm3/h'), source: 'setting' },
      inventory: { aerationMass_kg: fig(37200, 'kg'), clarifierMass_kg: fig(9000, 'kg') },
      srt: { target_d: 14 },
    };
    await suite.env.server.ctx.db.pool.query(`INSERT INTO balances (plant_id, ts, quality, data, inputs) VALUES ($1, now(), 'good', $2, '{}')`, [plantId, JSON.stringify(data)]);

    const page = await suite.browser.newPage({ viewport: { width: 1280, height: 900 } });
    const errors = watchConsole(page);
    await signIn(page, `${suite.env.server.url}/what-if`, E2E_ADMIN, /\/what-if$/);
    /** Fills one calculator from the plant, reads the named inputs, then calculates it. */
    const fillAndCalculate = async (region: string, kind: string, names: string[], calculate: string, result: string) => {
      const panel = page.getByRole('region', { name: region });
      await panel.getByRole('button', { name: 'Fill from live plant' }).click();
      await panel.getByTestId(`${kind}-prefill`).waitFor();
      const values: Record<string, string> = {};
      for (const n of names) values[n] = await panel.locator(`input[name="${n}"]`).inputValue();
      await panel.getByRole('button', { name: calculate }).click();
      await panel.getByTestId(result).waitFor();
      return values;
    };
    expect(
      await fillAndCalculate('Storm projection', 'storm', ['influentFlow_m3h', 'rasFlow_m3h', 'mlss_gL', 'svi_mLg', 'aerationVolume_m3', 'clarifierArea_m2', 'stormFlow_m3h', 'clarifierMass_kg'], 'Calculate storm', 'storm-result'),
    ).toEqual({
      influentFlow_m3h: '3100',
      rasFlow_m3h: '1690',
      mlss_gL: '3.1', // volume-weighted mean of 3.0 and 3.2 over equal basins
      svi_mLg: '150',
      aerationVolume_m3: '12000',
      clarifierArea_m2: '3000', // 2 × 1 500 m² in service
      stormFlow_m3h: '6200',
      clarifierMass_kg: '9000',
    });
    expect(
      await fillAndCalculate('State point analysis', 'statePoint', ['influentFlow_m3h', 'rasFlow_m3h', 'wasFlow_m3h', 'mlss_gL', 'clarifierArea_m2', 'settling.svi_mLg'], 'Calculate state point', 'state-point-result'),
    ).toEqual({ influentFlow_m3h: '3100', rasFlow_m3h: '1690', wasFlow_m3h: '22', mlss_gL: '3.1', clarifierArea_m2: '3000', 'settling.svi_mLg': '150' });
    // WAS and effluent TSS: area-weighted means; effluent flow 3 100 − 22 m³/h.
    expect(
      await fillAndCalculate('Sludge age (SRT)', 'srt', ['aerationMass_kg', 'clarifierMass_kg', 'wasFlow_m3h', 'wasTss_gL', 'effluentFlow_m3h', 'effluentTss_gL', 'targetSrt_d'], 'Calculate SRT', 'srt-result'),
    ).toEqual({ aerationMass_kg: '37200', clarifierMass_kg: '9000', wasFlow_m3h: '22', wasTss_gL: '8', effluentFlow_m3h: '3078', effluentTss_gL: '0.01', targetSrt_d: '14' });
    // Feed 3 100 + 1 690, underflow 1 690 + 22; layers and feed layer stay as they were.
    expect(
      await fillAndCalculate('Layered settler', 'settler', ['feedFlow_m3h', 'feedTss_gL', 'underflowFlow_m3h', 'area_m2', 'depth_m', 'layers', 'feedLayer'], 'Calculate profile', 'settler-result'),
    ).toEqual({ feedFlow_m3h: '4790', feedTss_gL: '3.1', underflowFlow_m3h: '1712', area_m2: '3000', depth_m: '4.5', layers: '10', feedLayer: '5' });
    await shot(page, 'what-if-prefilled');
    // The 401 of /auth/me before signing in is expected and handled; nothing else may appear.
    expect(errors.filter((e) => !/status of 401/.test(e))).toEqual([]);
  });
});
