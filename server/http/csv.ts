import { createHmac, randomBytes, timingSafeEqual } from 'node:crypto';
import type { Request, Response } from 'express';
import { BadRequestError } from './errors.ts';
import { toCsv, type CsvCell } from '../services/csv.service.ts';

/**
 * Table answers at the HTTP edge: content negotiation between JSON and CSV, the CSV body, and
 * cursor pagination headers.
 *
 * - CSV is chosen by `?format=csv` or by an Accept header that prefers `text/csv` over JSON
 *   (RFC 9110 §12.5.1 proactive negotiation, through Express's `req.accepts`). The body is
 *   RFC 4180 with a header row (server/services/csv.service.ts), `text/csv; charset=utf-8;
 *   header=present` (RFC 7111 registers the header parameter).
 * - A list route answers one page. JSON carries `nextCursor` in the body; both formats carry a
 *   `Link: <…>; rel="next"` header (RFC 8288) with the same query and the next cursor, and
 *   `X-Next-Cursor` for CSV callers that do not read Link headers. No header on the last page.
 * - A cursor is opaque to clients: base64url of a small JSON object that the route itself wrote
 *   (position plus whatever keeps the pages of one query consistent — the window, the step, the
 *   resolution), then `.` and an HMAC-SHA-256 tag of it (RFC 2104) under the deployment's cursor
 *   key (createCursorCodec). The cursor's fields choose how much a page reads, so a client must
 *   not be able to write them: one that was not written under that key (altered, forged),
 *   longer than 1 KiB, that does not decode, or belongs to another route is a 400.
 */

export function wantsCsv(req: Request): boolean {
  const f = (req.query as Record<string, unknown>).format;
  if (f === 'csv') return true;
  if (f === 'json') return false;
  if (!req.headers.accept) return false;
  return req.accepts(['application/json', 'text/csv']) === 'text/csv';
}

export function sendCsv(res: Response, filename: string, columns: readonly string[], rows: readonly (readonly CsvCell[])[]): void {
  res.status(200);
  res.setHeader('Content-Type', 'text/csv; charset=utf-8; header=present');
  res.setHeader('Content-Disposition', `attachment; filename="${filename.replace(/[^A-Za-z0-9._-]/g, '_')}"`);
  res.send(toCsv(columns, rows));
}

const MAX_CURSOR_CHARS = 1024;

/**
 * The paging cursors of one deployment: signed under a key derived from the session secret
 * (HMAC-SHA-256 of a fixed label, RFC 2104), which every API process of the deployment shares
 * (FLOCSTREAM_SESSION_SECRET, or the data folder's session-secret file), so a page written by
 * one process, or before a restart, is read by any other. Without a secret (tests): a random key.
 */
export function createCursorCodec(secret: Uint8Array = randomBytes(32)) {
  const key = createHmac('sha256', secret).update('flocstream paging cursor v1').digest();
  const tagOf = (body: string): Buffer => createHmac('sha256', key).update(body).digest().subarray(0, 16);
  return {
    encode(kind: string, payload: Record<string, string | number | null>): string {
      const body = Buffer.from(JSON.stringify({ k: kind, ...payload }), 'utf8').toString('base64url');
      return `${body}.${tagOf(body).toString('base64url')}`;
    },
    /** Decodes a cursor written by `encode(kind, …)` under the same secret; 400 for anything else. */
    decode<T extends Record<string, unknown>>(kind: string, cursor: string, check: (o: Record<string, unknown>) => o is T): T {
      const notOurs = () => new BadRequestError('the cursor is not one this API wrote (or its session secret changed since); pass nextCursor unchanged or start the query again');
      if (cursor.length > MAX_CURSOR_CHARS) throw notOurs();
      const [body, tag, ...rest] = cursor.split('.');
      if (!body || !tag || rest.length) throw notOurs();
      const given = Buffer.from(tag, 'base64url');
      const expected = tagOf(body);
      if (given.length !== expected.length || !timingSafeEqual(given, expected)) throw notOurs();
      let o: unknown;
      try {
        o = JSON.parse(Buffer.from(body, 'base64url').toString('utf8'));
      } catch {
        throw notOurs();
      }
      if (!o || typeof o !== 'object' || (o as { k?: unknown }).k !== kind || !check(o as Record<string, unknown>)) {
        throw new BadRequestError('the cursor does not belong to this route; pass nextCursor unchanged');
      }
      return o as T;
    },
  };
}
export type CursorCodec = ReturnType<typeof createCursorCodec>;

/** `Link: <same path and query, cursor=next>; rel="next"` (and X-Next-Cursor) when there is a next page. */
export function setNextPage(req: Request, res: Response, next: string | null): void {
  if (!next) return;
  const url = new URL(req.originalUrl, 'http://x');
  url.searchParams.set('cursor', next);
  res.setHeader('Link', `<${url.pathname}${url.search}>; rel="next"`);
  res.setHeader('X-Next-Cursor', next);
}

export const isNum = (v: unknown): v is number => typeof v === 'number' && Number.isFinite(v);
export const isStr = (v: unknown): v is string => typeof v === 'string';
