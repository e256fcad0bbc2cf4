import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { labImportResponse, labResultOut, labResultsResponse } from '../../shared/contracts/lab.ts';
import { parseCsv } from '../../server/services/csv.service.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';

const at = '2025-03-01T07:30:00Z';

describe('lab results API', () => {
  let h: TestApp;
  let op: Awaited<ReturnType<TestApp['agent']>>;
  let plant: number;
  let other: number;
  const q = (text: string, values: unknown[] = []) => h.ctx.db.pool.query(text, values);
  const count = async () => (await q(`SELECT count(*)::int n FROM lab_results WHERE plant_id = $1`, [plant])).rows[0].n as number;
  const post = (body: object) => op.post(`/api/v1/plants/${plant}/lab-results`).send(body);
  const upload = (csv: string, type = 'text/csv') => op.post(`/api/v1/plants/${plant}/lab-results/import`).set('Content-Type', type).send(csv);

  beforeAll(async () => {
    h = await createTestApp();
    op = await h.agent('operator');
    plant = (await q(`INSERT INTO plants (code, name) VALUES ('cedar', 'Cedar') RETURNING id`)).rows[0].id;
    other = (await q(`INSERT INTO plants (code, name) VALUES ('dune', 'Dune') RETURNING id`)).rows[0].id;
    const train = (await q(`INSERT INTO trains (plant_id, code, name) VALUES ($1, 't1', 'T1') RETURNING id`, [plant])).rows[0].id;
    await q(`WITH u AS (INSERT INTO basins (train_id, code, name) VALUES ($1, 'ab1', 'AB1') RETURNING id) INSERT INTO basin_versions (basin_id, effective_from, volume_m3, aerated_fraction) SELECT id, now(), 5000, 1 FROM u`, [train]);
    await q(`WITH u AS (INSERT INTO clarifiers (train_id, code, name) VALUES ($1, 'fc1', 'FC1') RETURNING id) INSERT INTO clarifier_versions (clarifier_id, effective_from, area_m2, side_water_depth_m, count) SELECT id, now(), 600, 4, 1 FROM u`, [train]);
  });
  afterAll(async () => h.close());

  it('SVI by form: index computed by the shared rule, unit fixed, readings kept, audited', async () => {
    const r = await post({ kind: 'SVI', settledVolume_mLL: 240, mlss_gL: 3.2, sampledAt: at, location: 'ab1', note: 'day shift' });
    expect(r.status).toBe(201);
    const out = labResultOut.parse(r.body);
    expect(out).toMatchObject({ kind: 'SVI', value: 240 / 3.2, unit: 'mL/g', location: 'ab1', sampledAt: '2025-03-01T07:30:00.000Z', flags: [], enteredBy: h.users.operator.id });
    expect(out.details).toEqual({ settledVolume_mLL: 240, mlss_gL: 3.2, note: 'day shift' });
    const a = await q(`SELECT actor, action, target, details FROM audit_log WHERE action = 'lab.create' ORDER BY id DESC LIMIT 1`);
    expect(a.rows[0]).toMatchObject({ actor: h.users.operator.email, target: `lab_result:${out.id}`, details: { kind: 'SVI', value: 75, unit: 'mL/g' } });
  });

  it('settled volume above 250 mL/L undiluted → 422 "dilute and repeat" under the field; DSVI rules of the shared domain', async () => {
    const before = await count();
    const undiluted = await post({ kind: 'SVI', settledVolume_mLL: 400, mlss_gL: 3.2, sampledAt: at });
    expect(undiluted.status).toBe(422);
    expect(undiluted.body.error.fields.settledVolume_mLL.join(' ')).toMatch(/dilute and repeat/);
    // DSVI = diluted settled volume × dilution / undiluted MLSS (Jenkins et al. 1993): 200·2/4 = 100 mL/g.
    const dsvi = await post({ kind: 'DSVI', settledVolume_mLL: 200, dilutionFactor: 2, mlss_gL: 4, sampledAt: at });
    expect(dsvi.status).toBe(201);
    expect(dsvi.body).toMatchObject({ kind: 'DSVI', value: 100, unit: 'mL/g', details: { settledVolume_mLL: 200, dilutionFactor: 2, mlss_gL: 4 } });
    const still = await post({ kind: 'DSVI', settledVolume_mLL: 300, dilutionFactor: 2, mlss_gL: 4, sampledAt: at });
    expect(still.status).toBe(422);
    expect(still.body.error.fields.settledVolume_mLL.join(' ')).toMatch(/dilute and repeat with a higher dilution/);
    const over = await post({ kind: 'DSVI', settledVolume_mLL: 100, dilutionFactor: 4, mlss_gL: 4, sampledAt: at });
    expect(over.status).toBe(422);
    expect(over.body.error.fields.settledVolume_mLL.join(' ')).toMatch(/over-diluted/);
    const sviDiluted = await post({ kind: 'SVI', settledVolume_mLL: 200, dilutionFactor: 2, mlss_gL: 4, sampledAt: at });
    expect(sviDiluted.status).toBe(422);
    expect(sviDiluted.body.error.fields).toHaveProperty('dilutionFactor');
    expect(await count()).toBe(before + 1);
  });

  it('SSVI off 3.5 g/L is stored but flagged estimated; MLSS in g/L and TSS in mg/L', async () => {
    const ssvi = await post({ kind: 'SSVI', settledVolume_mLL: 360, mlss_gL: 4.5, sampledAt: at });
    expect(ssvi.status).toBe(201);
    expect(ssvi.body.value).toBe(80);
    expect(ssvi.body.flags).toEqual([expect.stringMatching(/^estimated: SSVI3\.5 is defined at 3\.5 g\/L/)]);
    const mlss = await post({ kind: 'MLSS', mlss_gL: 3.35, sampledAt: at, location: 'ab1' });
    expect(mlss.body).toMatchObject({ kind: 'MLSS', value: 3.35, unit: 'g/L' });
    const tss = await post({ kind: 'TSS', tss_mgL: 12.5, sampledAt: at, location: 'fc1' });
    expect(tss.body).toMatchObject({ kind: 'TSS', value: 12.5, unit: 'mg/L' });
  });

  it('refuses, with the field named: unit mix-ups, future sample times, unknown locations, unknown kinds, extra fields', async () => {
    const before = await count();
    const cases: Array<[object, string]> = [
      [{ kind: 'MLSS', mlss_gL: 3350, sampledAt: at }, 'mlss_gL'], // mg/L typed into g/L
      [{ kind: 'MLSS', value: 3.3, unit: 'g/L', sampledAt: at }, 'mlss_gL'],
      [{ kind: 'TSS', tss_mgL: -1, sampledAt: at }, 'tss_mgL'],
      [{ kind: 'SVI', settledVolume_mLL: 240, mlss_gL: 3, sampledAt: new Date(Date.now() + 3_600_000).toISOString() }, 'sampledAt'],
      [{ kind: 'SVI', settledVolume_mLL: 240, mlss_gL: 3, sampledAt: '1 March' }, 'sampledAt'],
      [{ kind: 'SVI', settledVolume_mLL: 240, mlss_gL: 3, sampledAt: at, location: 'zz9' }, 'location'],
      [{ kind: 'COD', value: 3, sampledAt: at }, 'kind'],
      [{ kind: 'TSS', tss_mgL: 5, sampledAt: at, unit: 'g/L' }, '_'],
    ];
    for (const [body, field] of cases) {
      const r = await post(body);
      expect(r.status, JSON.stringify(body)).toBe(422);
      expect(Object.keys(r.body.error.fields), JSON.stringify(body)).toContain(field);
    }
    expect(await count()).toBe(before);
    expect((await (await h.agent('analyst')).post(`/api/v1/plants/${plant}/lab-results`).send({ kind: 'TSS', tss_mgL: 5, sampledAt: at })).status).toBe(403);
  });

  it('CSV import: a valid file is stored whole, in one audited write; quoted notes survive', async () => {
    const before = await count();
    const csv = [
      'kind,sampledAt,location,settledVolume_mLL,mlss_gL,dilutionFactor,tss_mgL,note',
      `SVI,2025-03-02T07:30:00Z,ab1,220,2.75,,,"morning, after ""rain"""`,
      `DSVI,2025-03-02T07:45:00Z,ab1,180,3.6,2,,`,
      `MLSS,2025-03-02T08:00:00Z,ab1,,3.6,,,`,
      `TSS,2025-03-02T08:00:00Z,fc1,,,,8.25,"two\nlines"`,
      '',
    ].join('\r\n');
    const r = await upload(csv);
    expect(r.status).toBe(201);
    const out = labImportResponse.parse(r.body);
    expect(out.imported).toBe(4);
    expect(out.results.map((x) => [x.kind, x.value, x.unit])).toEqual([
      ['SVI', 220 / 2.75, 'mL/g'],
      ['DSVI', (180 * 2) / 3.6, 'mL/g'],
      ['MLSS', 3.6, 'g/L'],
      ['TSS', 8.25, 'mg/L'],
    ]);
    expect(out.results[0]!.details.note).toBe('morning, after "rain"');
    expect(out.results[3]!.details.note).toBe('two\nlines');
    expect(await count()).toBe(before + 4);
    const a = await q(`SELECT details FROM audit_log WHERE action = 'lab.import' ORDER BY id DESC LIMIT 1`);
    expect(a.rows[0].details).toMatchObject({ plantId: plant, rows: 4, ids: out.results.map((x) => x.id) });
  });

  it('CSV import with bad rows: nothing stored, every bad row named by line and field', async () => {
    const before = await count();
    const audits = (await q(`SELECT count(*)::int n FROM audit_log WHERE action = 'lab.import'`)).rows[0].n;
    const csv = [
      'kind,sampledAt,location,settledVolume_mLL,mlss_gL,dilutionFactor,tss_mgL,note',
      'SVI,2025-03-03T07:30:00Z,ab1,220,2.75,,,',
      'SVI,2025-03-03T07:30:00Z,ab1,400,2.75,,,',
      'MLSS,2025-03-03T07:30:00Z,ab1,,3;5,,,',
      'COD,2025-03-03T07:30:00Z,,,,,,',
      'TSS,2025-03-03T07:30:00Z,zz9,,,,8,',
      'TSS,2025-03-03T07:30:00Z,fc1,,,,8',
      'MLSS,2999-01-01T00:00:00Z,ab1,,3,,,',
    ].join('\n');
    const r = await upload(csv);
    expect(r.status).toBe(422);
    const fields = r.body.error.fields as Record<string, string[]>;
    expect(fields['line.3.settledVolume_mLL']!.join(' ')).toMatch(/dilute and repeat/);
    expect(fields).toHaveProperty(['line.4.mlss_gL']);
    expect(fields).toHaveProperty(['line.5.kind']);
    expect(fields['line.6.location']!.join(' ')).toMatch(/no basin or clarifier "zz9"/);
    expect(fields['line.7']!.join(' ')).toMatch(/7 fields where the header has 8/);
    expect(fields).toHaveProperty(['line.8.sampledAt']);
    expect(Object.keys(fields).some((k) => k.startsWith('line.2'))).toBe(false);
    expect(r.body.error.message).toMatch(/^6 of 7 rows have errors.*nothing was stored/);
    expect(await count()).toBe(before);
    expect((await q(`SELECT count(*)::int n FROM audit_log WHERE action = 'lab.import'`)).rows[0].n).toBe(audits);
  });

  it('CSV import: bad header, broken quoting, wrong content type, too large, unknown plant', async () => {
    const bad = await upload('kind,when,value\nSVI,2025-03-03T07:30:00Z,1\n');
    expect(bad.status).toBe(422);
    expect(bad.body.error.fields['line.1'].join(' ')).toMatch(/unknown column\(s\) when, value.*missing column\(s\) sampledAt/);
    const quote = await upload('kind,sampledAt,note\nSVI,2025-03-03T07:30:00Z,"open\n');
    expect(quote.status).toBe(422);
    expect(quote.body.error.fields).toHaveProperty(['line.2']);
    expect((await upload('kind,sampledAt\n')).status).toBe(422);
    const json = await op.post(`/api/v1/plants/${plant}/lab-results/import`).send({ kind: 'SVI' });
    expect(json.status).toBe(415);
    const big = await upload('kind,sampledAt,note\n' + `MLSS,${at},${'x'.repeat(1 << 20)}\n`);
    expect(big.status).toBe(413);
    expect((await op.post('/api/v1/plants/999999/lab-results/import').set('Content-Type', 'text/csv').send('kind,sampledAt\n')).status).toBe(404);
  });

  it('list: newest sample first, filters, pages, CSV export with the readings; other plants stay apart', async () => {
    await q(`INSERT INTO lab_results (plant_id, kind, value, unit, sampled_at) VALUES ($1, 'MLSS', 9, 'g/L', now() - interval '1 day')`, [other]);
    const all = labResultsResponse.parse((await op.get(`/api/v1/plants/${plant}/lab-results`)).body);
    const times = all.results.map((r) => Date.parse(r.sampledAt));
    expect([...times].sort((a, b) => b - a)).toEqual(times);
    expect(all.results.every((r) => r.plantId === plant)).toBe(true);
    const svi = labResultsResponse.parse((await op.get(`/api/v1/plants/${plant}/lab-results`).query({ kind: 'SVI' })).body);
    expect(svi.results.length).toBeGreaterThanOrEqual(2);
    expect(svi.results.every((r) => r.kind === 'SVI')).toBe(true);
    const fc1 = labResultsResponse.parse((await op.get(`/api/v1/plants/${plant}/lab-results`).query({ location: 'fc1' })).body);
    expect(fc1.results.map((r) => r.kind)).toEqual(['TSS', 'TSS']);
    const windowed = labResultsResponse.parse((await op.get(`/api/v1/plants/${plant}/lab-results`).query({ from: '2025-03-02T00:00:00Z', to: '2025-03-03T00:00:00Z' })).body);
    expect(windowed.results).toHaveLength(4);
    const ids: number[] = [];
    let cursor: string | null = null;
    do {
      const page: { body: { results: Array<{ id: number }>; nextCursor: string | null } } = await op.get(`/api/v1/plants/${plant}/lab-results`).query({ limit: 3, ...(cursor ? { cursor } : {}) });
      ids.push(...page.body.results.map((r) => r.id));
      cursor = page.body.nextCursor;
    } while (cursor);
    expect(ids).toEqual(all.results.map((r) => r.id));
    const csv = await op.get(`/api/v1/plants/${plant}/lab-results`).query({ format: 'csv' });
    const parsed = parseCsv(csv.text);
    if (!parsed.ok) throw new Error(parsed.message);
    const [header, ...rows] = parsed.records;
    const col = (name: string) => header!.fields.indexOf(name);
    expect(rows.map((r) => Number(r.fields[col('value')]))).toEqual(all.results.map((r) => r.value));
    const dsvi = rows.find((r) => r.fields[col('kind')] === 'DSVI')!;
    expect(dsvi.fields[col('dilutionFactor')]).toBe('2');
  });
});
