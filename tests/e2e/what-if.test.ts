import type { Page } from 'playwright-core';
import { describe, expect, it } from 'vitest';
import path from 'node:path';
import { E2E_ADMIN, SCREENSHOT_DIR, serverAndBrowser, shot, watchConsole, signIn } from '../helpers/browser.ts';

// Kestrel Bend is our invented demo plant; the forms come pre-filled with its example values.
describe('what-if calculators in Debian Chromium', () => {
  const suite = serverAndBrowser();

  async function openWhatIf(page: Page): Promise<void> {
    await signIn(page, `${suite.env.server.url}/what-if`, E2E_ADMIN, /\/what-if$/);
    await page.getByRole('heading', { name: 'What-if calculators' }).waitFor();
  }

  it('runs the storm and state-point calculators, draws the diagram, and shows a field error for SVI 0', async () => {
    const page = await suite.browser.newPage({ viewport: { width: 1280, height: 900 } });
    const errors = watchConsole(page);
    await openWhatIf(page);
    await shot(page, 'what-if-empty');

    // storm: 1 500 → 3 000 m³/h with RAS held at 900 m³/h, SVI 120 → X_R,max = 1200/120 = 10 g/L,
    // equilibrium MLSS = 10·900/(3000+900) = 2.308 g/L (hand calculation, design §3 item 4)
    const storm = page.getByRole('region', { name: 'Storm projection' });
    await storm.getByRole('button', { name: 'Calculate storm' }).click();
    const stormResult = storm.getByTestId('storm-result');
    await stormResult.waitFor();
    const stormText = await stormResult.innerText();
    expect(stormText).toMatch(/X_R,max \(factor \/ SVI\)\s+10\.00\s+g\/L/);
    expect(stormText).toMatch(/MLSS at storm equilibrium\s+2\.31\s+g\/L/);
    const checks = await storm.getByTestId('storm-checks').innerText();
    expect(checks).toMatch(/PASS\s+Basin MLSS during storage/);
    // rise = (3.2 − 2.308)·12 000 kg × 0.12 m³/kg / 1 400 m² = 0.92 m > 0.3 m
    expect(checks).toMatch(/FAIL\s+Blanket rise\s+0\.92 m not ≤ 0\.30 m/);
    expect(stormText).toContain('Advisory: check against lab results');

    // state point with the Härtel & Pöpel correlation at SVI 120
    const sp = page.getByRole('region', { name: 'State point analysis' });
    await sp.getByRole('button', { name: 'Calculate state point' }).click();
    await sp.getByTestId('state-point-result').waitFor();
    const spText = await sp.getByTestId('state-point-result').innerText();
    // SOR = (1500 − 20)/1400 = 1.057 m/h; SLR = 2400·3.2/1400 = 5.49 kg/(m²·h); X_R,req = 7680/920 = 8.35 g/L
    expect(spText).toMatch(/Overflow rate SOR\s+1\.057\s+m\/h/);
    expect(spText).toMatch(/Solids loading SLR\s+5\.49\s+kg\/\(m²·h\)/);
    expect(spText).toMatch(/Required underflow conc\.\s+8\.35\s+g\/L/);
    expect(spText).toMatch(/Quality: good/);
    const diagram = sp.getByTestId('state-point-diagram');
    await diagram.waitFor();
    const svgText = await diagram.textContent();
    expect(svgText).toContain('Solids concentration X [g/L]');
    expect(svgText).toContain('Solids flux G [kg/(m²·h)]');
    expect(svgText).toContain('state point');
    for (const part of ['gravity-flux', 'total-flux', 'overflow-line', 'underflow-line', 'state-point-marker']) {
      expect(await diagram.getByTestId(part).count(), part).toBe(1);
    }
    expect((await diagram.getByTestId('gravity-flux').getAttribute('d'))!.length).toBeGreaterThan(100);
    await shot(page, 'what-if-storm-and-state-point');
    await diagram.screenshot({ path: path.join(SCREENSHOT_DIR, 'what-if-state-point-diagram.png') });

    // an invalid SVI is caught client-side by the same zod schema, shown beside the field; no stale result stays
    const svi = sp.getByLabel('SVI [mL/g]');
    await svi.fill('0');
    await sp.getByRole('button', { name: 'Calculate state point' }).click();
    const fieldAlert = sp.getByRole('alert');
    await fieldAlert.waitFor();
    expect(await fieldAlert.innerText()).toMatch(/>=\s*20/);
    expect(await svi.getAttribute('aria-invalid')).toBe('true');
    expect(await sp.getByTestId('state-point-result').count()).toBe(0);

    const stormSvi = storm.getByLabel('SVI [mL/g]');
    await stormSvi.fill('abc');
    await storm.getByRole('button', { name: 'Calculate storm' }).click();
    await storm.getByRole('alert').waitFor();
    expect(await storm.getByRole('alert').innerText()).toContain('enter a number');
    await shot(page, 'what-if-field-errors');

    // keyboard only: correct the value and press Enter in the field; the result comes back and the error goes
    await svi.fill('120');
    await svi.press('Enter');
    await sp.getByTestId('state-point-result').waitFor();
    expect(await sp.getByRole('alert').count()).toBe(0);

    // 401 on /auth/me before signing in is expected and handled; anything else is an error.
    expect(errors.filter((e) => !/401/.test(e))).toEqual([]);

    // the server answers the same way when the client check is bypassed (422, same field path)
    const res = await page.evaluate(async () => {
      const r = await fetch('/api/v1/calc/storm', {
        method: 'POST',
        headers: { 'Content-Type': 'application/json' },
        body: JSON.stringify({ influentFlow_m3h: 1500, rasFlow_m3h: 900, mlss_gL: 3.2, svi_mLg: 0, aerationVolume_m3: 12000, clarifierArea_m2: 1400, stormFlow_m3h: 3000 }),
      });
      return { status: r.status, body: (await r.json()) as { error: { fields: Record<string, string[]> } } };
    });
    expect(res.status).toBe(422);
    expect(Object.keys(res.body.error.fields)).toEqual(['svi_mLg']);
    errors.length = 0; // the browser logs that deliberate 422 as a failed resource

    // settler profile and the two smaller calculators
    const settler = page.getByRole('region', { name: 'Layered settler' });
    await settler.getByRole('button', { name: 'Calculate profile' }).click();
    await settler.getByTestId('settler-profile').waitFor();
    expect(await settler.getByTestId('layer-bar').count()).toBe(10);
    expect(await settler.getByTestId('blanket-line').count()).toBe(1);
    await settler.getByTestId('settler-profile').screenshot({ path: path.join(SCREENSHOT_DIR, 'what-if-settler-profile.png') });
    expect(await settler.getByTestId('settler-result').innerText()).toMatch(/Blanket height at 3 g\/L\s+[0-9.]+\s+m above floor/);
    const srt = page.getByRole('region', { name: 'Sludge age (SRT)' });
    await srt.getByRole('button', { name: 'Calculate SRT' }).click();
    await srt.getByTestId('srt-result').waitFor();
    // (38 400 + 6 000) kg / (20·8.5 + 1480·0.010) kg/h = 44 400/184.8 h = 240.26 h = 10.01 d
    expect(await srt.getByTestId('srt-result').innerText()).toMatch(/Total SRT\s+10\.01\s+d/);
    const sv = page.getByRole('region', { name: 'Settleability index' });
    await sv.getByRole('button', { name: 'Calculate index' }).click();
    await sv.getByTestId('svi-result').waitFor();
    // DSVI = 192 mL/L × 2 / 3.2 g/L = 120 mL/g
    expect(await sv.getByTestId('svi-result').innerText()).toMatch(/DSVI\s+120\s+mL\/g/);
    await shot(page, 'what-if-all');

    // usable at a 1280 px laptop width: nothing wider than the viewport
    const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
    expect(overflow).toBeLessThanOrEqual(0);
    expect(errors).toEqual([]);
  });
});
