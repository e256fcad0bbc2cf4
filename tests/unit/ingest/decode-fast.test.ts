import { describe, expect, it } from 'vitest';
import { batchItem, isoTimestampPattern, singleValuePayload } from '../../../shared/contracts/mqtt-payload.ts';
import { decodePayload, fastReading, isoToMs } from '../../../ingest/pipeline/decode.ts';
import { mulberry32 } from '../domain/prng.js';

// The fast path must accept exactly what the zod schemas accept, with the same result.
const TS = [
  undefined,
  '2026-12-02T01:00:00Z',
  '2026-12-02T01:00:00.123Z',
  '2026-12-02T01:00:00.123456+01:00',
  '2026-12-02T23:59:59-05:30',
  '2024-02-29T00:00:00Z', // leap day
  '2026-02-29T00:00:00Z', // not a leap year
  '2026-13-01T00:00:00Z',
  '2026-12-02T24:00:00Z',
  '2026-12-02T01:00Z', // no seconds
  '2026-12-02 01:00:00Z',
  '2026-12-02T01:00:00z',
  '2026-12-02T01:00:00+2400',
  '2026-12-02T01:00:00',
  '',
  12345,
  null,
];
const V = [0, -1.5, 4.12, 1e300, null, Number.NaN, 'x', true, undefined, [], {}];
const Q = [undefined, 'good', 'uncertain', 'bad', 'Good', '', 1];
const TOPIC = ['kb/ab1/AIT-101', '', 'x'.repeat(512), 'x'.repeat(513), 7, undefined];
const EXTRA = [{}, { extra: 1 }, JSON.parse('{"__proto__": 1}')];

function* cases(withTopic: boolean) {
  let i = 0;
  for (const ts of TS)
    for (const v of V)
      for (const q of Q)
        for (const topic of withTopic ? TOPIC : [undefined]) {
          const extra = EXTRA[i++ % EXTRA.length]!;
          const o: Record<string, unknown> = { ...extra };
          if (v !== undefined || i % 2) o.v = v;
          if (ts !== undefined) o.ts = ts;
          if (q !== undefined) o.q = q;
          if (topic !== undefined) o.topic = topic;
          // through JSON, as payloads arrive (NaN becomes null there; test the raw object too)
          yield o;
          yield JSON.parse(JSON.stringify(o));
        }
}

const same = (fast: ReturnType<typeof fastReading>, z: { topic?: string; v: number | null; ts?: string; q?: string }, topic: string) =>
  expect(fast).toEqual({ topic: z.topic ?? topic, v: z.v, ts: z.ts === undefined ? undefined : Date.parse(z.ts), q: z.q ?? 'good' });

describe('fast reading check agrees with the zod contract (shared/contracts/mqtt-payload.ts)', () => {
  it('batch items: accepted by one exactly when accepted by the other, same result', () => {
    let accepted = 0;
    let n = 0;
    for (const o of cases(true)) {
      n++;
      const z = batchItem.safeParse(o);
      const f = fastReading(o);
      expect(f !== null, JSON.stringify(o)).toBe(z.success);
      if (z.success) {
        accepted++;
        same(f, z.data, '');
      }
    }
    expect(n).toBeGreaterThan(15_000);
    expect(accepted).toBeGreaterThan(100);
  });

  it('single values: the same, with the message topic', () => {
    let accepted = 0;
    for (const o of cases(false)) {
      const z = singleValuePayload.safeParse(o);
      const f = fastReading(o, 't/1');
      expect(f !== null, JSON.stringify(o)).toBe(z.success);
      if (z.success) {
        accepted++;
        same(f, z.data, 't/1');
      }
    }
    expect(accepted).toBeGreaterThan(50);
  });

  it('a batch with one bad item still goes through zod for the per-item reason and keeps the good ones', () => {
    const payload = Buffer.from(JSON.stringify({ samples: [{ topic: 'a', v: 1 }, { topic: 'b', v: 'x' }, { topic: 'c', v: 3, ts: '2026-12-02T01:00:00Z' }] }));
    const r = decodePayload('batch', payload);
    expect(r.ok).toBe(true);
    if (!r.ok) return;
    expect(r.items.map((i) => i.topic)).toEqual(['a', 'c']);
    expect(r.errors).toHaveLength(1);
    expect(r.errors[0]!.reason).toMatch(/^batch item 1: v:/);
  });
});

describe('isoToMs', () => {
  it('gives the instant Date.parse gives for 20 000 generated timestamps the contract accepts (ECMA-262 Date Time String Format)', () => {
    const rnd = mulberry32(5);
    const pad = (x: number, w: number) => String(x).padStart(w, '0');
    let checked = 0;
    for (let i = 0; i < 20_000; i++) {
      const y = i % 50 === 0 ? Math.floor(rnd() * 200) : 1900 + Math.floor(rnd() * 250);
      const mo = 1 + Math.floor(rnd() * 12);
      const d = 1 + Math.floor(rnd() * 31);
      const base = `${pad(y, 4)}-${pad(mo, 2)}-${pad(d, 2)}T${pad(Math.floor(rnd() * 24), 2)}:${pad(Math.floor(rnd() * 60), 2)}:${pad(Math.floor(rnd() * 60), 2)}`;
      const frac = ['', '.' + pad(Math.floor(rnd() * 1000), 3), '.5', '.123456'][i % 4]!;
      const zone = ['Z', 'Z', '+01:00', '-05:30'][Math.floor(rnd() * 4)]!;
      const ts = base + frac + zone;
      if (!isoTimestampPattern.test(ts)) continue; // 31 February and the like: refused before this point
      expect(isoToMs(ts)).toBe(Date.parse(ts));
      checked++;
    }
    expect(checked).toBeGreaterThan(15_000);
  });
});
