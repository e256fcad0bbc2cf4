import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Sample } from '../../ingest/pipeline/types.ts';
import { RowChecker, type ImportTag } from '../../server/jobs/history-rows.ts';
import { LineScanner } from '../../server/jobs/history-scan.ts';
import { createTestDatabase, type TestDatabase } from '../helpers/db.ts';
import { mulberry32 } from '../unit/domain/prng.ts';

/**
 * The SQL path of the historian import (LineScanner of server/jobs/history-scan.ts checks each
 * line and writes it as a typed COPY row; PostgreSQL's input functions read the row's timestamp
 * and value) may store a line only as the line checks (server/jobs/history-rows.ts, RowChecker)
 * would: for every line the scanner passes and PostgreSQL reads, RowChecker must accept it with
 * the same time, value and quality. A line either refuses is fine (the file then goes the
 * csv-parse path). Checked on every printable ASCII character put in place of each character of
 * typical timestamps and values, and on random changes of two to four characters.
 */
const TAG: ImportTag = { id: 7, name: 'FIT-101', unit: 'm3/h', rangeLow: 0, rangeHigh: 5000 };
const PRINTABLE = Array.from({ length: 95 }, (_, i) => String.fromCharCode(32 + i));

/** A line of the file; `tag` defaults to FIT-101 (a field such as `FIT-101 [gpm]` converts). */
type Line = { ts: string; value: string; quality: string; tag?: string };
type Outcome = { ts: number; value: number | null; quality: number } | null;

function checker(timezone = 'UTC'): RowChecker {
  const c = new RowChecker([TAG], { layout: 'long', tsFormat: 'iso', timezone });
  c.header(['tag', 'ts', 'value', 'quality']);
  return c;
}

function viaChecker(l: Line, timezone = 'UTC'): Outcome {
  const out: Sample[] = [];
  checker(timezone).row([l.tag ?? TAG.name, l.ts, l.value, l.quality], 2, out);
  return out.length ? { ts: out[0]!.ts, value: out[0]!.value, quality: out[0]!.quality } : null;
}

/** The scanner's COPY row for one line (an import in UTC, with the quality column, tags resolved as the job does), or null where it refuses the line. */
function scanned(l: Line): string | null {
  const c = checker();
  const s = new LineScanner(0x2c, 4, true, (text) => {
    const col = c.column(text);
    return typeof col === 'string' ? col : { tagId: col.tag.id, factor: col.factor, rangeLow: col.tag.rangeLow, rangeHigh: col.tag.rangeHigh };
  });
  const rows = Buffer.concat([s.push(Buffer.from(`tag,ts,value,quality\n${l.tag ?? TAG.name},${l.ts},${l.value},${l.quality}\n`)), s.end()]).toString('latin1');
  return s.irregular === null ? rows : null;
}

function substitutions(base: string): string[] {
  const out: string[] = [];
  for (let i = 0; i < base.length; i++) for (const ch of PRINTABLE) if (ch !== base[i]) out.push(base.slice(0, i) + ch + base.slice(i + 1));
  // Dropped and doubled characters too.
  for (let i = 0; i < base.length; i++) out.push(base.slice(0, i) + base.slice(i + 1), base.slice(0, i) + base[i] + base.slice(i));
  return out;
}

describe('historian import SQL path: what the scanner types and PostgreSQL reads, the line checks accept the same', () => {
  let t: TestDatabase;
  let c: pg.Client;

  /**
   * Each line through the scanner, then its COPY row's fields through PostgreSQL's input
   * functions (the text form of COPY calls the same input functions as a cast from text; the
   * scanner writes no backslash but `\N`), or null where either refuses it: one row at a time, in
   * a PL/pgSQL loop that catches each row's data exception (one round trip for thousands of lines).
   */
  async function viaSql(lines: Line[]): Promise<Outcome[]> {
    const rows = lines.map(scanned);
    await c.query('TRUNCATE lines, results');
    await c.query('INSERT INTO lines SELECT * FROM unnest($1::int[], $2::text[])', [lines.map((_, i) => i), rows.map((r) => (r === null ? null : r.replace(/\n$/, '')))]);
    await c.query(`DO $do$ DECLARE l record; f text[]; BEGIN
      FOR l IN SELECT * FROM lines ORDER BY id LOOP
        IF l.row IS NULL THEN
          INSERT INTO results VALUES (l.id, null, null, null, 'scan');
          CONTINUE;
        END IF;
        BEGIN
          f := string_to_array(l.row, E'\t');
          IF f[1]::int <> ${TAG.id} THEN RAISE EXCEPTION 'tag id %', f[1]; END IF;
          INSERT INTO results VALUES (l.id, (extract(epoch FROM f[2]::timestamptz) * 1000)::float8, CASE WHEN f[3] = '\\N' THEN NULL ELSE f[3]::float8 END, f[4]::int2, null);
        EXCEPTION WHEN data_exception THEN
          INSERT INTO results VALUES (l.id, null, null, null, SQLSTATE);
        END;
      END LOOP; END $do$`);
    const r = await c.query('SELECT id, ts, v, q, refused FROM results ORDER BY id');
    expect(r.rows).toHaveLength(lines.length);
    return r.rows.map((x) => (x.refused ? null : { ts: x.ts, value: x.v, quality: x.q }));
  }

  /** Lines the SQL path stores (scanner passed, PostgreSQL read) are RowChecker's, to the bit. */
  async function same(lines: Line[]): Promise<{ converted: number; refused: number }> {
    const sql = await viaSql(lines);
    let converted = 0;
    lines.forEach((l, i) => {
      if (sql[i] === null) return;
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
    await c.query('CREATE TEMP TABLE lines (id int, row text)');
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
      // A unit in the tag field: US gpm to m³/h (× 0.2271247…; NIST SP 811, B.9: US gallon = 231 in³).
      { tag: 'FIT-101 [gpm]', ts: '2026-03-14T15:09:27Z', value: '2641.7205', quality: 'good' },
      // 30 000 gpm = 6813.7 m³/h, above the range: flagged.
      { tag: 'FIT-101 [gpm]', ts: '2026-03-14T15:09:28Z', value: '30000', quality: 'good' },
    ];
    const r = await same(lines);
    expect(r).toEqual({ converted: lines.length, refused: 0 });
    // 6000 is above FIT-101's 0–5000 range: flagged uncertain + outOfRange (1 | 1 << 3), as RowChecker does.
    expect((await viaSql([lines[5]!]))[0]?.quality).toBe(9);
    expect((await viaSql([lines[7]!]))[0]?.value).toBeCloseTo(600, 3);
    expect((await viaSql([lines[8]!]))[0]?.quality).toBe(9);
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
    // Converted values: the scanner writes the product in JavaScript's shortest round-trip form.
    for (const base of ['2641.7205', '1e-3']) await same(substitutions(base).map((value) => ({ tag: 'FIT-101 [gpm]', ts: '2026-03-14T15:09:26Z', value, quality: 'good' })));
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
