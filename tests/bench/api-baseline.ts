/**
 * The reference of `npm run bench:api`: a minimal Express + pg handler in a process of its own,
 * answering `GET /plants/:plantId/balance/live` with the same row and the same JSON as the product
 * (`{ plantId, balance: { id, ts, quality, data, inputs }, age_s }`): one query per request, no
 * credentials, no logging, no validation — what plain Express on the same database costs.
 *
 * Usage: node --import tsx tests/bench/api-baseline.ts <database url>; prints `{"port":N}` once
 * listening, stops on SIGTERM.
 */
import type net from 'node:net';
import express from 'express';
import pg from 'pg';

const url = process.argv[2];
if (!url) throw new Error('usage: api-baseline.ts <database url>');
// The product's bench process uses a pool of 20 (tests/bench/api.bench.ts); the same here.
// bigint ids as numbers, as the product's server/db/client.ts sets it.
pg.types.setTypeParser(20, (v) => Number(v));
const pool = new pg.Pool({ connectionString: url, max: 20 });
pool.on('error', () => {});
const app = express();
app.disable('x-powered-by');
app.get('/plants/:plantId/balance/live', async (req, res) => {
  const plantId = Number(req.params.plantId);
  const r = await pool.query('SELECT id, ts, quality, data, inputs FROM balances WHERE plant_id = $1 ORDER BY ts DESC, id DESC LIMIT 1', [plantId]);
  const b = r.rows[0] as { id: number; ts: Date; quality: string; data: unknown; inputs: unknown } | undefined;
  if (!b) return void res.json({ plantId, balance: null, age_s: null, reason: 'no balance has been computed for this plant yet' });
  res.json({ plantId, balance: { id: b.id, ts: b.ts.toISOString(), quality: b.quality, data: b.data, inputs: b.inputs }, age_s: (Date.now() - b.ts.getTime()) / 1000 });
});
const server = app.listen(0, '127.0.0.1', () => process.stdout.write(JSON.stringify({ port: (server.address() as net.AddressInfo).port }) + '\n'));
process.on('SIGTERM', () => {
  server.closeAllConnections();
  server.close(() => void pool.end().then(() => process.exit(0)));
});
