import http, { type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import express from 'express';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { LISTENER_APPLICATION_NAME } from '../../server/db/pg-listener.ts';
import { errorMiddleware } from '../../server/http/error-middleware.ts';
import { DEFAULT_STREAM_OPTIONS, StreamHub, notifyStream, serveStream, streamHub } from '../../server/services/stream.service.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { waitFor } from '../helpers/wait.ts';

interface SseEvent {
  id?: string;
  event?: string;
  data?: string;
}

/** A minimal Server-Sent Events reader (WHATWG HTML §9.2.6 field parsing) over node:http. */
function openSse(url: string, headers: Record<string, string>) {
  const events: SseEvent[] = [];
  const comments: string[] = [];
  let status = 0;
  let contentType = '';
  let buf = '';
  let ended = false;
  const req = http.get(url, { headers: { Accept: 'text/event-stream', ...headers } }, (res) => {
    status = res.statusCode ?? 0;
    contentType = String(res.headers['content-type'] ?? '');
    res.setEncoding('utf8');
    res.on('data', (chunk: string) => {
      buf += chunk;
      let i: number;
      while ((i = buf.indexOf('\n\n')) >= 0) {
        const block = buf.slice(0, i);
        buf = buf.slice(i + 2);
        const ev: SseEvent = {};
        for (const line of block.split('\n')) {
          if (line.startsWith(':')) comments.push(line.slice(1).trim());
          else {
            const m = /^([a-z]+): ?(.*)$/.exec(line);
            if (m && (m[1] === 'id' || m[1] === 'event' || m[1] === 'data')) ev[m[1]] = m[2];
          }
        }
        if (ev.event || ev.data) events.push(ev);
      }
    });
    res.on('end', () => (ended = true));
    res.on('close', () => (ended = true));
  });
  req.on('error', () => (ended = true));
  const until = async <T>(what: string, f: () => T | undefined | false, ms = 5000): Promise<T> => {
    const t0 = Date.now();
    for (;;) {
      const v = f();
      if (v) return v;
      if (Date.now() - t0 > ms) throw new Error(`timed out waiting for ${what}; events ${JSON.stringify(events)} comments ${JSON.stringify(comments)}`);
      await new Promise((r) => setTimeout(r, 20));
    }
  };
  return {
    events,
    comments,
    get status() {
      return status;
    },
    get contentType() {
      return contentType;
    },
    get ended() {
      return ended;
    },
    until,
    ready: () => until('ready', () => comments.includes('ready')),
    next: (event: string, after = 0) => until(`event ${event}`, () => events.slice(after).find((e) => e.event === event)),
    close: () => req.destroy(),
  };
}

describe('live stream (SSE)', () => {
  let h: TestApp;
  let server: Server;
  let base: string;
  let token: string;
  let plant: number;
  let other: number;
  let tag: number;
  const q = (text: string, values: unknown[] = []) => h.ctx.db.pool.query(text, values);
  const sse = (plantId: number, query = '', auth = token) => openSse(`${base}/api/v1/plants/${plantId}/stream${query}`, { Authorization: `Bearer ${auth}` });

  beforeAll(async () => {
    h = await createTestApp();
    const a = await h.agent('analyst');
    token = (await a.post('/api/v1/tokens').send({ name: 'stream', role: 'analyst', expiresInDays: 1 })).body.token;
    plant = (await q(`INSERT INTO plants (code, name) VALUES ('elm', 'Elm') RETURNING id`)).rows[0].id;
    other = (await q(`INSERT INTO plants (code, name) VALUES ('fir', 'Fir') RETURNING id`)).rows[0].id;
    const src = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'elm-mqtt', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [plant])).rows[0].id;
    tag = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, 'RAS_FLOW', 'elm/ras/flow', 'm3/h') RETURNING id`, [plant, src])).rows[0].id;
    await q(`INSERT INTO tag_latest (tag_id, ts, value, quality) VALUES ($1, now(), 410, 0)`, [tag]);
    server = await new Promise((r) => {
      const s = h.app.listen(0, '127.0.0.1', () => r(s));
    });
    base = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
  });
  afterAll(async () => {
    server.closeAllConnections();
    await new Promise((r) => server.close(r));
    await h.close();
  });

  it('delivers an in-process published balance, a pg_notify alarm and a changed tag value, by event name', async () => {
    const s = sse(plant);
    await s.ready();
    expect(s.status).toBe(200);
    expect(s.contentType).toMatch(/^text\/event-stream/);

    streamHub(h.ctx).publish(plant, 'balance', { ts: '2025-06-02T12:00:00.000Z', inventory_kg: 51234.5, quality: 'good' });
    const bal = await s.next('balance');
    expect(JSON.parse(bal.data!)).toEqual({ ts: '2025-06-02T12:00:00.000Z', inventory_kg: 51234.5, quality: 'good' });
    expect(Number(bal.id)).toBeGreaterThan(0);

    // Another process: its own connection, plain SQL.
    const c = new pg.Client({ connectionString: h.t.url });
    await c.connect();
    try {
      const n = s.events.length;
      await c.query(`SELECT pg_notify('flocstream_stream', $1)`, [JSON.stringify({ plantId: plant, event: 'alarm', data: { id: 7, rule: 'blanket-high', state: 'raised' } })]);
      expect(JSON.parse((await s.next('alarm', n)).data!)).toEqual({ id: 7, rule: 'blanket-high', state: 'raised' });
      // Malformed payloads and other plants' events are dropped; the stream goes on.
      // Counted before the notifications: the event can arrive before the next line runs.
      const m = s.events.length;
      await c.query(`SELECT pg_notify('flocstream_stream', 'not json'), pg_notify('flocstream_stream', '{"plantId":"x","event":"tag"}')`);
      await notifyStream(c, other, 'balance', { not: 'yours' });
      await notifyStream(c, plant, 'balance', { second: true });
      expect(JSON.parse((await s.next('balance', m)).data!)).toEqual({ second: true });
      expect(s.events.some((e) => e.data?.includes('yours'))).toBe(false);
    } finally {
      await c.end();
    }

    // Ingest does not notify: the tag_latest poll finds the change.
    const k = s.events.length;
    await q(`UPDATE tag_latest SET ts = now(), value = 433.5, quality = 5, received_at = now() WHERE tag_id = $1`, [tag]);
    const t = JSON.parse((await s.next('tag', k)).data!);
    expect(t).toMatchObject({ tagId: tag, value: 433.5, quality: 5 });
    expect(Date.parse(t.ts)).toBeGreaterThan(Date.now() - 10_000);
    // Sent once, not on every poll: a second tag changed now arrives from a later poll whose
    // look-back still covers the first change, and the first is not sent again.
    const marker = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit) SELECT plant_id, source_id, 'WAS_FLOW', 'elm/was/flow', 'm3/h' FROM tags WHERE id = $1 RETURNING id`, [tag])).rows[0].id;
    await q(`INSERT INTO tag_latest (tag_id, ts, value, quality, received_at) VALUES ($1, now(), 21, 0, now())`, [marker]);
    await s.until('the second tag', () => s.events.some((e) => e.event === 'tag' && JSON.parse(e.data!).tagId === marker));
    expect(s.events.filter((e) => e.event === 'tag').map((e) => JSON.parse(e.data!).tagId)).toEqual([tag, marker]);
    s.close();
  });

  it('events= narrows the stream; a disconnect releases the subscription and the LISTEN connection', async () => {
    const hub = streamHub(h.ctx);
    const s = sse(plant, '?events=alarm');
    await s.ready();
    expect(hub.connections).toBe(1);
    hub.publish(plant, 'balance', { skipped: true });
    hub.publish(plant, 'alarm', { id: 1 });
    await s.next('alarm');
    expect(s.events.map((e) => e.event)).toEqual(['alarm']);
    // The process's own cache listener (server/db/pg-listener.ts) stays; this counts the hub's.
    const listeners = async () => (await q(`SELECT count(*)::int n FROM pg_stat_activity WHERE datname = current_database() AND query ILIKE 'LISTEN%' AND application_name <> $1`, [LISTENER_APPLICATION_NAME])).rows[0].n;
    expect(await listeners()).toBe(1);
    s.close();
    await s.until('server-side cleanup', () => hub.connections === 0);
    await waitFor(listeners, (n) => n === 0, { what: 'the LISTEN connection closing' });
  });

  it('refuses bad input and unknown plants before opening a stream; caps streams per token (429)', async () => {
    const bad = sse(plant, '?events=bogus');
    await bad.until('status', () => bad.status !== 0);
    expect(bad.status).toBe(422);
    const unknown = sse(999999);
    await unknown.until('status', () => unknown.status !== 0);
    expect(unknown.status).toBe(404);
    const open = Array.from({ length: DEFAULT_STREAM_OPTIONS.maxPerOwner }, () => sse(plant));
    await Promise.all(open.map((o) => o.ready()));
    const extra = sse(plant);
    await extra.until('status', () => extra.status !== 0);
    expect(extra.status).toBe(429);
    for (const o of open) o.close();
    await open[0]!.until('cleanup', () => streamHub(h.ctx).connections === 0);
    const again = sse(plant);
    await again.ready();
    again.close();
  });

  it('heartbeat comments keep an idle connection alive; a client that stops reading is cut off', async () => {
    const hub = new StreamHub(h.ctx, { ...DEFAULT_STREAM_OPTIONS, heartbeatMs: 100, maxBufferedBytes: 64 * 1024 });
    const app = express();
    app.use((req, _res, next) => {
      req.principal = { userId: h.users.analyst.id, email: 'x', role: 'analyst', tokenId: null, plantIds: null };
      next();
    });
    app.get('/s', (req, res) => serveStream(hub, req, res, plant, new Set(['balance'])));
    app.use(errorMiddleware(h.ctx.log));
    const srv: Server = await new Promise((r) => {
      const s = app.listen(0, '127.0.0.1', () => r(s));
    });
    try {
      const url = `http://127.0.0.1:${(srv.address() as AddressInfo).port}/s`;
      const s = openSse(url, {});
      await s.ready();
      await s.until('two heartbeats', () => s.comments.filter((c) => c.startsWith('heartbeat')).length >= 2, 3000);
      s.close();
      await s.until('cleanup', () => hub.connections === 0);

      // A reader that never reads: the socket buffers fill, the server gives up on it.
      const stuck = http.get(url, (res) => res.pause());
      await s.until('the stuck client subscribed', () => hub.connections === 1);
      const big = 'x'.repeat(16 * 1024);
      for (let i = 0; i < 2000 && hub.connections > 0; i++) {
        hub.publish(plant, 'balance', { big });
        if (i % 50 === 0) await new Promise((r) => setImmediate(r));
      }
      await s.until('slow client dropped', () => hub.connections === 0, 5000);
      stuck.destroy();
    } finally {
      srv.closeAllConnections();
      srv.close();
    }
  });
});
