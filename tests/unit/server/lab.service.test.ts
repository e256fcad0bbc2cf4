import { describe, expect, it } from 'vitest';
import { ForbiddenError, NotFoundError, UnsupportedMediaTypeError, ValidationError } from '../../../server/http/errors.ts';
import type { LabRow, NewLabRow } from '../../../server/repositories/lab.repository.ts';
import { createLabService } from '../../../server/services/lab.service.ts';
import { createCursorCodec } from '../../../server/http/csv.ts';
import { fakeAudit, fakePlantAccess, operator, scopedToken } from './service-fakes.ts';

/** A lab repository in memory: the basin and clarifier codes of plant 1, rows appended on insert. */
function fakeLabRepo(codes: string[]) {
  const rows: LabRow[] = [];
  let calls = 0;
  return {
    rows,
    inserts: () => calls,
    async locationCodes() {
      return new Set(codes);
    },
    async insertAll(news: NewLabRow[]): Promise<LabRow[]> {
      calls++;
      const out = news.map(
        (n, i): LabRow => ({
          id: rows.length + i + 1,
          plantId: n.plantId,
          kind: n.kind,
          value: n.value,
          unit: n.unit,
          location: n.location ?? null,
          sampledAt: n.sampledAt,
          details: n.details ?? {},
          flags: n.flags ?? [],
          enteredBy: n.enteredBy ?? null,
          createdAt: new Date('2026-12-02T08:00:00Z'),
        }),
      );
      rows.push(...out);
      return out;
    },
    async list() {
      return rows.map((r) => ({ ...r, cursorTs: r.sampledAt.toISOString() }));
    },
  };
}

function setup() {
  const labRepo = fakeLabRepo(['ab1', 'fc1']);
  const audit = fakeAudit();
  const svc = createLabService({ labRepo, plantAccess: fakePlantAccess([1]), audit, cursors: createCursorCodec() });
  return { labRepo, audit, svc };
}

describe('lab service with a fake repository (no HTTP, no database)', () => {
  it('an SVI entry is stored with the index computed from the readings, the caller as author, and audited', async () => {
    const { labRepo, audit, svc } = setup();
    // SVI = V30 / MLSS (Standard Methods 2710 D): 250 mL/L ÷ 2.5 g/L = 100 mL/g, computed by hand.
    const out = await svc.create(operator, 1, { kind: 'SVI', settledVolume_mLL: 250, mlss_gL: 2.5, sampledAt: '2026-12-02T07:30:00Z', location: 'ab1' });
    expect(out).toMatchObject({ plantId: 1, kind: 'SVI', value: 100, unit: 'mL/g', location: 'ab1', enteredBy: operator.userId, sampledAt: '2026-12-02T07:30:00.000Z' });
    expect(labRepo.rows).toHaveLength(1);
    expect(labRepo.rows[0]!.details).toEqual({ settledVolume_mLL: 250, mlss_gL: 2.5 });
    expect(audit.entries).toEqual([{ actor: operator, action: 'lab.create', target: `lab_result:${out.id}`, details: expect.objectContaining({ plantId: 1, kind: 'SVI', value: 100, unit: 'mL/g' }) }]);
  });

  it('a DSVI carries its dilution: 200 mL/L × 2 ÷ 4 g/L = 100 mL/g (Jenkins, Richard & Daigger 1993 definition; hand computed)', async () => {
    const { svc } = setup();
    const out = await svc.create(operator, 1, { kind: 'DSVI', settledVolume_mLL: 200, mlss_gL: 4, dilutionFactor: 2, sampledAt: '2026-12-02T07:30:00Z' });
    expect(out.value).toBeCloseTo(100, 12);
  });

  it('an unknown location is a 422 naming the field and the known codes; nothing stored, nothing audited', async () => {
    const { labRepo, audit, svc } = setup();
    const err = await svc.create(operator, 1, { kind: 'MLSS', mlss_gL: 3.1, sampledAt: '2026-12-02T07:30:00Z', location: 'ab9' }).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ValidationError);
    expect((err as ValidationError).fields).toEqual({ location: ['no basin or clarifier "ab9" in this plant (known: ab1, fc1)'] });
    expect(labRepo.inserts()).toBe(0);
    expect(audit.entries).toEqual([]);
  });

  it('a token scoped to another plant is refused before any read; an unknown plant is 404', async () => {
    const { labRepo, svc } = setup();
    await expect(svc.create(scopedToken, 1, { kind: 'MLSS', mlss_gL: 3, sampledAt: '2026-12-02T07:30:00Z' })).rejects.toBeInstanceOf(ForbiddenError);
    await expect(svc.list(operator, 3, {}, 10)).rejects.toBeInstanceOf(NotFoundError);
    expect(labRepo.inserts()).toBe(0);
  });

  it('CSV import is all or nothing: one bad row stores nothing and names line and field; a good file is one insert and one audit entry', async () => {
    const { labRepo, audit, svc } = setup();
    const bad = 'kind,sampledAt,mlss_gL\r\nMLSS,2026-12-02T06:00:00Z,3.2\r\nMLSS,2026-12-02T07:00:00Z,abc\r\n';
    const err = await svc.importCsv(operator, 1, bad).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ValidationError);
    expect(Object.keys((err as ValidationError).fields!)).toEqual(['line.3.mlss_gL']);
    expect(labRepo.inserts()).toBe(0);

    const good = 'kind,sampledAt,mlss_gL,location\r\nMLSS,2026-12-02T06:00:00Z,3.2,ab1\r\nMLSS,2026-12-02T07:00:00Z,3.4,fc1\r\n';
    const out = await svc.importCsv(operator, 1, good);
    expect(out.imported).toBe(2);
    expect(out.results.map((r) => [r.value, r.unit, r.location])).toEqual([
      [3.2, 'g/L', 'ab1'],
      [3.4, 'g/L', 'fc1'],
    ]);
    expect(labRepo.inserts()).toBe(1);
    expect(audit.entries.map((e) => [e.action, e.target, e.details?.rows])).toEqual([['lab.import', 'plant:1', 2]]);
  });

  it('an upload that is not a CSV body is a 415 after the plant check', async () => {
    const { svc } = setup();
    await expect(svc.importCsv(operator, 1, undefined)).rejects.toBeInstanceOf(UnsupportedMediaTypeError);
    await expect(svc.importCsv(operator, 5, undefined)).rejects.toBeInstanceOf(NotFoundError);
  });
});
