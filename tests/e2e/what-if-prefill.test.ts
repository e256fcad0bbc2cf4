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
    const storm = page.getByRole('region', { name: 'Storm projection' });
    await storm.getByRole('button', { name: 'Fill from live plant' }).click();
    await storm.getByTestId('storm-prefill').waitFor();
    const val = (name: string) => storm.locator(`input[name="${name}"]`).inputValue();
    expect(await val('influentFlow_m3h')).toBe('3100');
    expect(await val('rasFlow_m3h')).toBe('1690');
    expect(await val('mlss_gL')).toBe('3.1'); // volume-weighted mean of 3.0 and 3.2 over equal basins
    expect(await val('svi_mLg')).toBe('150');
    expect(await val('aerationVolume_m3')).toBe('12000');
    expect(await val('clarifierArea_m2')).toBe('3000'); // 2 × 1 500 m² in service
    expect(await val('stormFlow_m3h')).toBe('6200');
    expect(await val('clarifierMass_kg')).toBe('9000');
    await storm.getByRole('button', { name: 'Calculate storm' }).click();
    await storm.getByTestId('storm-result').waitFor();

    const sp = page.getByRole('region', { name: 'State point analysis' });
    await sp.getByRole('button', { name: 'Fill from live plant' }).click();
    await sp.getByTestId('statePoint-prefill').waitFor();
    const spVal = (name: string) => sp.locator(`input[name="${name}"]`).inputValue();
    expect([await spVal('influentFlow_m3h'), await spVal('rasFlow_m3h'), await spVal('wasFlow_m3h'), await spVal('mlss_gL'), await spVal('clarifierArea_m2'), await spVal('settling.svi_mLg')]).toEqual(['3100', '1690', '22', '3.1', '3000', '150']);
    await sp.getByRole('button', { name: 'Calculate state point' }).click();
    await sp.getByTestId('state-point-result').waitFor();

    const srt = page.getByRole('region', { name: 'Sludge age (SRT)' });
    await srt.getByRole('button', { name: 'Fill from live plant' }).click();
    await srt.getByTestId('srt-prefill').waitFor();
    const srtVal = (name: string) => srt.locator(`input[name="${name}"]`).inputValue();
    // WAS and effluent TSS: area-weighted means; effluent flow 3 100 − 22 m³/h.
    expect([await srtVal('aerationMass_kg'), await srtVal('clarifierMass_kg'), await srtVal('wasFlow_m3h'), await srtVal('wasTss_gL'), await srtVal('effluentFlow_m3h'), await srtVal('effluentTss_gL'), await srtVal('targetSrt_d')]).toEqual(['37200', '9000', '22', '8', '3078', '0.01', '14']);
    await srt.getByRole('button', { name: 'Calculate SRT' }).click();
    await srt.getByTestId('srt-result').waitFor();

    const settler = page.getByRole('region', { name: 'Layered settler' });
    await settler.getByRole('button', { name: 'Fill from live plant' }).click();
    await settler.getByTestId('settler-prefill').waitFor();
    const stVal = (name: string) => settler.locator(`input[name="${name}"]`).inputValue();
    // Feed 3 100 + 1 690, underflow 1 690 + 22; layers and feed layer stay as they were.
    expect([await stVal('feedFlow_m3h'), await stVal('feedTss_gL'), await stVal('underflowFlow_m3h'), await stVal('area_m2'), await stVal('depth_m'), await stVal('layers'), await stVal('feedLayer')]).toEqual(['4790', '3.1', '1712', '3000', '4.5', '10', '5']);
    await settler.getByRole('button', { name: 'Calculate profile' }).click();
    await settler.getByTestId('settler-result').waitFor();
    await shot(page, 'what-if-prefilled');
    // The 401 of /auth/me before signing in is expected and handled; nothing else may appear.
    expect(errors.filter((e) => !/status of 401/.test(e))).toEqual([]);
  });
});
