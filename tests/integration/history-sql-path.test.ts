import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Sample } from '../../ingest/pipeline/types.ts';
import { RowChecker, type ImportTag } from '../../server/jobs/history-rows.ts';
import { LineScanner } from '../../server/jobs/history-scan.ts';
import { sqlSamplesSelect } from '../../server/repositories/history.repository.ts';
import { createTestDatabase, type TestDatabase } from '../helpers/db.ts';
import { mulberry32 } from '../unit/domain/prng.ts';

/**
 * The SQL path of the historian import (the scan of server/jobs/history-scan.ts, then the
 * conversion of server/repositories/history.repository.ts) may store a line only as the line
 * checks (server/jobs/history-rows.ts, RowChecker) would: for every line the scan passes and
 * PostgreSQL converts, RowChecker must accept it with the same time, value and quality. A line
 * either refuses is fine (the file then goes the csv-parse path). Checked on every printable
 * ASCII character put in place of each character of typical timestamps and values, and on random
 * changes of two to four characters.
 */
const TAG: ImportTag = { id: 7, name: 'FIT-101', unit: 'm3/h', rangeLow: 0, rangeHigh: 5000 };
const PRINTABLE = Array.from({ length: 95 }, (_, i) => String.fromCharCode(32 + i));

type Line = { ts: string; value: string; quality: string };
type Outcome = { ts: number; value: number | null; quality: number } | null;

function viaChecker(l: Line, timezone = 'UTC'): Outcome {
  const c = new RowChecker([TAG], { layout: 'long', tsFormat: 'iso', timezone });
  c.header(['tag', 'ts', 'value', 'quality']);
  const out: Sample[] = [];
  c.row([TAG.name, l.ts, l.value, l.quality], 2, out);
  return out.length ? { ts: out[0]!.ts, value: out[0]!.value, quality: out[0]!.quality } : null;
}

function substitutions(base: string): string[] {
  const out: string[] = [];
  for (let i = 0; i < base.length; i++) for (const ch of PRINTABLE) if (ch !== base[i]) out.push(base.slice(0, i) + ch + base.slice(i + 1));
  // Dropped and doubled characters too.
  for (let i = 0; i < base.length; i++) out.push(base.slice(0, i) + base.slice(i + 1), base.slice(0, i) + base[i] + base.slice(i));
  return out;
}

describe('historian import SQL path: what PostgreSQL converts, the line checks accept the same', () => {
  let t: TestDatabase;
  let c: pg.Client;
  const select = sqlSamplesSelect({ withQuality: true });

  /**
   * The SQL conversion of each line, or null where PostgreSQL refuses it: one line at a time in
   * `history_raw`, in a PL/pgSQL loop that catches each line's data exception (one round trip for
   * thousands of lines).
   */
  async function viaSql(lines: Line[]): Promise<Outcome[]> {
    const inline = select
      .replace('$1::text[]', `ARRAY['${TAG.name}']::text[]`)
      .replace('$2::int[]', `ARRAY[${TAG.id}]::int[]`)
      .replace('$3::float8[]', 'ARRAY[1]::float8[]')
      .replace('$4::float8[]', `ARRAY[${TAG.rangeLow}]::float8[]`)
      .replace('$5::float8[]', `ARRAY[${TAG.rangeHigh}]::float8[]`);
    await c.query('TRUNCATE lines, results');
    await c.query('INSERT INTO lines SELECT * FROM unnest($1::int[], $2::text[], $3::text[], $4::text[])', [lines.map((_, i) => i), lines.map((l) => l.ts), lines.map((l) => l.value), lines.map((l) => l.quality)]);
    await c.query(`DO $do$ DECLARE l record; BEGIN
      FOR l IN SELECT * FROM lines ORDER BY id LOOP
        BEGIN
          DELETE FROM history_raw;
          INSERT INTO history_raw VALUES ('${TAG.name}', l.ts, l.value, l.quality);
          INSERT INTO results SELECT l.id, (extract(epoch FROM s.ts) * 1000)::float8, s.v, s.q, null FROM (${inline}) s (tag_id, ts, v, q);
        EXCEPTION WHEN data_exception THEN
          INSERT INTO results VALUES (l.id, null, null, null, SQLSTATE);
        END;
      END LOOP; END $do$`);
    const r = await c.query('SELECT id, ts, v, q, refused FROM results ORDER BY id');
    expect(r.rows).toHaveLength(lines.length);
    return r.rows.map((x) => (x.refused ? null : { ts: x.ts, value: x.v, quality: x.q }));
  }

  /** The scan's verdict on one line (an import in UTC, with the quality column). */
  const scanned = (l: Line): boolean => {
    const s = new LineScanner(0x2c, 4, true);
    s.push(Buffer.from(`tag,ts,value,quality\n${TAG.name},${l.ts},${l.value},${l.quality}\n`));
    s.end();
    return s.irregular === null;
  };

  /** Lines the SQL path stores (scan passed, PostgreSQL converted) are RowChecker's, to the bit. */
  async function same(lines: Line[]): Promise<{ converted: number; refused: number }> {
    const sql = await viaSql(lines);
    let converted = 0;
    lines.forEach((l, i) => {
      if (sql[i] === null || !scanned(l)) return;
      converted++;
      expect(viaChecker(l), JSON.stringify(l)).toEqual(sql[i]);
    });
    return { converted, refused: lines.length - converted };
  }

  beforeAll(async () => {
    t = await createTestDatabase();
    c = new pg.Client({ connectionString: t.url });
    await c.connect();
    await c.query(`SET timezone = 'UTC'`);
    await c.query('CREATE TEMP TABLE history_raw (tag text, ts text, value text, quality text)');
    await c.query('CREATE TEMP TABLE lines (id int, ts text, value text, quality text)');
    await c.query('CREATE TEMP TABLE results (id int, ts float8, v float8, q int, refused text)');
  });
  afterAll(async () => {
    await c?.end();
    await t?.drop();
  });

  it('the forms it reads convert exactly as the line checks do', async () => {
    const lines: Line[] = [
      { ts: '2026-03-14T15:09:26Z', value: '1506.25', quality: 'good' },
      { ts: '2026-03-14T15:09:26.535Z', value: '-12.5e+3', quality: 'GOOD' },
      // 17:09:26.535+02:00 is 15:09:26.535Z.
      { ts: '2026-03-14T17:09:26.535+02:00', value: '.5', quality: 'uncertain' },
      { ts: '2026-03-14T10:09:26-05:00', value: '7', quality: 'Bad' },
      { ts: '2026-03-14 15:09:26', value: '', quality: 'bad' },
      { ts: '1999-12-31T23:59:59.999', value: '6000', quality: '' },
      { ts: '2026-03-14T24:00:00Z', value: '1e-5', quality: '192' },
    ];
    const r = await same(lines);
    expect(r).toEqual({ converted: lines.length, refused: 0 });
    // 6000 is above FIT-101's 0–5000 range: flagged uncertain + outOfRange (1 | 1 << 3), as RowChecker does.
    expect((await viaSql([lines[5]!]))[0]?.quality).toBe(9);
  });

  it('every one-character change of a timestamp: converted only where the line checks agree', async () => {
    for (const base of ['2026-03-14T15:09:26Z', '2026-03-14T15:09:26.535+01:00', '2026-03-14 15:09:26']) {
      const r = await same(substitutions(base).map((ts) => ({ ts, value: '1', quality: 'good' })));
      // Digits for digits still convert; the rest is refused.
      expect(r.converted).toBeGreaterThan(50);
      expect(r.refused).toBeGreaterThan(r.converted);
    }
  }, 120_000);

  it('every one-character change of a value and a quality: converted only where the line checks agree', async () => {
    for (const base of ['-12.5e+3', '1506.25', '0.001']) await same(substitutions(base).map((value) => ({ ts: '2026-03-14T15:09:26Z', value, quality: 'good' })));
    for (const base of ['good', 'uncertain', '192']) await same(substitutions(base).map((quality) => ({ ts: '2026-03-14T15:09:26Z', value: '1', quality })));
    await same(['NaN', 'Infinity', '-inf', '0x10', '1e400', '1e-400', ' 5 ', '5.', '+.5', '1_0', '٣'].map((value) => ({ ts: '2026-03-14T15:09:26Z', value, quality: 'good' })));
  }, 120_000);

  it('random changes of two to four characters', async () => {
    const rnd = mulberry32(2026);
    const bases = ['2026-03-14T15:09:26.535Z', '2026-03-14T15:09:26+01:00'];
    const lines: Line[] = [];
    for (let k = 0; k < 3000; k++) {
      const chars = [...bases[k % 2]!];
      const n = 2 + Math.floor(rnd() * 3);
      for (let j = 0; j < n; j++) chars[Math.floor(rnd() * chars.length)] = PRINTABLE[Math.floor(rnd() * PRINTABLE.length)]!;
      lines.push({ ts: chars.join(''), value: '1', quality: 'good' });
    }
    await same(lines);
  }, 120_000);
});
