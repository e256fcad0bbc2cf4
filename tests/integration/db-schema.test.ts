import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestDatabase, type TestDatabase } from '../helpers/db.ts';

describe('schema on the private cluster', () => {
  let t: TestDatabase;
  let c: pg.Client;
  beforeAll(async () => {
    t = await createTestDatabase();
    c = new pg.Client({ connectionString: t.url });
    await c.connect();
  });
  afterAll(async () => {
    await c.end();
    await t.drop();
  });

  it('has every table of DESIGN §4', async () => {
    const r = await c.query<{ tablename: string }>(`SELECT tablename FROM pg_tables WHERE schemaname = 'public'`);
    const names = new Set(r.rows.map((x) => x.tablename));
    for (const t of ['users', 'api_tokens', 'audit_log', 'plants', 'trains', 'basins', 'clarifiers', 'pumps', 'settings', 'sources', 'tags', 'signal_map', 'samples', 'rollup_1m', 'rollup_1h', 'balances', 'lab_results', 'alarms', 'dead_letters']) {
      expect(names, t).toContain(t);
    }
  });

  it('samples is partitioned by day and a replayed (tag, ts) is not duplicated', async () => {
    const kind = await c.query(`SELECT relkind FROM pg_class WHERE relname = 'samples'`);
    expect(kind.rows[0].relkind).toBe('p');
    const ts = new Date();
    await c.query(`INSERT INTO samples VALUES (1, $1, 2.5, 0)`, [ts]);
    await c.query(`INSERT INTO samples VALUES (1, $1, 2.5, 0) ON CONFLICT DO NOTHING`, [ts]);
    await expect(c.query(`INSERT INTO samples VALUES (1, $1, 9, 0)`, [ts])).rejects.toThrow(/duplicate key/);
    const n = await c.query(`SELECT count(*)::int n FROM samples WHERE tag_id = 1`);
    expect(n.rows[0].n).toBe(1);
    const part = await c.query(`SELECT tableoid::regclass::text p FROM samples WHERE tag_id = 1`);
    expect(part.rows[0].p).toMatch(/^samples_\d{8}$/);
  });

  it('moves rows out of the default partition when their day partition is created', async () => {
    const far = new Date('2031-05-17T12:00:00Z');
    await c.query(`INSERT INTO samples VALUES (2, $1, 1, 0)`, [far]);
    expect((await c.query(`SELECT tableoid::regclass::text p FROM samples WHERE tag_id = 2`)).rows[0].p).toBe('samples_default');
    await c.query(`SELECT flocstream_ensure_day_partition($1)`, [far]);
    expect((await c.query(`SELECT tableoid::regclass::text p FROM samples WHERE tag_id = 2`)).rows[0].p).toBe('samples_20310517');
    const dropped = await c.query(`SELECT flocstream_drop_partitions_before($1) n`, [new Date('2031-05-18T00:00:00Z')]);
    expect(dropped.rows[0].n).toBeGreaterThanOrEqual(1);
    expect((await c.query(`SELECT count(*)::int n FROM samples WHERE tag_id = 2`)).rows[0].n).toBe(0);
  });
});
