import { describe, expect, it } from 'vitest';
import { createCursorCodec, isNum } from '../../../server/http/csv.ts';
import { BadRequestError } from '../../../server/http/errors.ts';

const isWindow = (o: Record<string, unknown>): o is { p: number; f: number; t: number } => isNum(o.p) && isNum(o.f) && isNum(o.t);

const { encode: encodeCursor, decode: decodeCursor } = createCursorCodec(new TextEncoder().encode('the session secret of one deployment'));

describe('paging cursors: signed (HMAC-SHA-256, RFC 2104) and checked', () => {
  it('a cursor this process wrote decodes to what was written', () => {
    const c = encodeCursor('balance-history', { p: 3, f: 1000, t: 2000 });
    expect(c).toMatch(/^[A-Za-z0-9_-]+\.[A-Za-z0-9_-]+$/);
    expect(decodeCursor('balance-history', c, isWindow)).toEqual({ k: 'balance-history', p: 3, f: 1000, t: 2000 });
  });

  it('a cursor with its window widened, its tag cut or swapped, another route, too long or garbage is a 400', () => {
    const c = encodeCursor('balance-history', { p: 3, f: 1000, t: 2000 });
    const [, tag] = c.split('.');
    const widened = `${Buffer.from(JSON.stringify({ k: 'balance-history', p: 3, f: 0, t: 9e15 })).toString('base64url')}.${tag}`;
    const other = encodeCursor('alarms', { p: 3, f: 1000, t: 2000 });
    const bad = [
      widened,
      Buffer.from(JSON.stringify({ k: 'balance-history', p: 3, f: 0, t: 9e15 })).toString('base64url'),
      c.slice(0, -2),
      `${c}.x`,
      other,
      `${c}${'A'.repeat(2000)}`,
      'not a cursor',
      '',
    ];
    for (const x of bad) expect(() => decodeCursor('balance-history', x, isWindow), x.slice(0, 40)).toThrow(BadRequestError);
  });

  it('a signed cursor whose fields fail the route check is still a 400', () => {
    const c = encodeCursor('balance-history', { p: 3, f: 'x', t: 2000 });
    expect(() => decodeCursor('balance-history', c, isWindow)).toThrow(/does not belong to this route/);
  });

  it('any API process of the deployment (the same session secret) reads a cursor another wrote; another secret refuses it', () => {
    const secret = new TextEncoder().encode('the session secret of one deployment');
    const c = createCursorCodec(secret).encode('alarms', { p: 3, ts: 1000, id: 9 });
    expect(createCursorCodec(secret).decode('alarms', c, (o): o is { p: number } => isNum(o.p))).toEqual({ k: 'alarms', p: 3, ts: 1000, id: 9 });
    expect(() => createCursorCodec(new TextEncoder().encode('another deployment')).decode('alarms', c, (o): o is { p: number } => isNum(o.p))).toThrow(/not one this API wrote/);
  });
});
