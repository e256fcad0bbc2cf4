import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { decodePayload, looksLikeBatch } from '../../../ingest/pipeline/decode.ts';
import { TagProcessor, isSample } from '../../../ingest/pipeline/quality.ts';
import { TopicMap, parseTopicFilter, topicMatches } from '../../../ingest/pipeline/topic-match.ts';
import type { TagConfig } from '../../../ingest/pipeline/types.ts';
import { aggregate, mergeInto } from '../../../ingest/sink/rollup.ts';
import { Spool } from '../../../ingest/sink/spool.ts';
import { encodeSamplesBinary } from '../../../ingest/sink/copy-binary.ts';
import { QUALITY_FLAG, qualityFlags, qualityGrade } from '../../../shared/contracts/sample-quality.ts';
import { mulberry32 } from '../domain/prng.js';

const tag = (over: Partial<TagConfig> = {}): TagConfig => ({ id: 7, sourceId: 1, address: 'a/b', scaleGain: 1, scaleOffset: 0, deadband: 0, expectedPeriod_s: 10, rangeLow: null, rangeHigh: null, samplingInterval_ms: null, kind: 'analog', ...over });

describe('topic filters (MQTT 5.0 §4.7)', () => {
  it('matches + and # as the spec examples do', () => {
    const f = (s: string) => parseTopicFilter(s) as string[];
    expect(topicMatches(f('sport/tennis/player1/#'), 'sport/tennis/player1')).toBe(true);
    expect(topicMatches(f('sport/tennis/player1/#'), 'sport/tennis/player1/score/wimbledon')).toBe(true);
    expect(topicMatches(f('sport/#'), 'sport')).toBe(true);
    expect(topicMatches(f('sport/tennis/+'), 'sport/tennis/player1')).toBe(true);
    expect(topicMatches(f('sport/tennis/+'), 'sport/tennis/player1/ranking')).toBe(false);
    expect(topicMatches(f('sport/+'), 'sport')).toBe(false);
    expect(topicMatches(f('+/+'), '/finance')).toBe(true);
    expect(topicMatches(f('#'), '$SYS/uptime')).toBe(false);
    expect(parseTopicFilter('sport/tennis#')).toHaveProperty('error');
    expect(parseTopicFilter('sport/#/ranking')).toHaveProperty('error');
    expect(parseTopicFilter('sport+')).toHaveProperty('error');
  });
  it('prefers an exact topic over a pattern', () => {
    const m = new TopicMap<number>([['p/+/flow', 1], ['p/ab1/flow', 2]]);
    expect(m.get('p/ab1/flow')).toBe(2);
    expect(m.get('p/ab2/flow')).toBe(1);
    expect(m.get('p/ab2/level')).toBeUndefined();
  });
});

describe('decode', () => {
  const d = (s: string) => decodePayload('x/y', Buffer.from(s));
  it('accepts the three formats', () => {
    expect(d('4.12')).toMatchObject({ ok: true, items: [{ topic: 'x/y', v: 4.12, q: 'good' }] });
    expect(d('{"v":1,"ts":"2026-01-01T00:00:00Z","q":"uncertain"}')).toMatchObject({ ok: true, items: [{ v: 1, ts: Date.UTC(2026, 0, 1), q: 'uncertain' }] });
    expect(d('{"samples":[{"topic":"a","v":1},{"topic":"b","v":null,"q":"bad"}]}')).toMatchObject({ ok: true, items: [{ topic: 'a' }, { topic: 'b', v: null }] });
  });
  it('rejects NaN, Infinity, wrong types and broken JSON with a reason', () => {
    for (const s of ['NaN', 'Infinity', '-Infinity', '{"v":"1"}', '{"v":1e999}', '{"v":', '', '{"v":null}', '{"v":1,"x":2}', '0x10']) {
      const r = d(s);
      expect(r.ok, s).toBe(false);
      if (!r.ok) expect(r.reason.length).toBeGreaterThan(0);
    }
  });
  it('keeps the good items of a batch and reports the bad ones', () => {
    const r = d('{"samples":[{"topic":"a","v":1},{"topic":"b","v":"x"},{"topic":"c","v":3}]}');
    expect(r.ok && r.items.map((i) => i.topic)).toEqual(['a', 'c']);
    expect(r.ok && r.errors.map((e) => e.index)).toEqual([1]);
  });
  it('recognises batches by their envelope', () => {
    expect(looksLikeBatch(Buffer.from('  {"samples": []}'))).toBe(true);
    expect(looksLikeBatch(Buffer.from('{"v": 1}'))).toBe(false);
  });
});

describe('TagProcessor', () => {
  it('scales and grades range, source status, flat line and future timestamps', () => {
    const p = new TagProcessor(tag({ scaleGain: 2, scaleOffset: 1, rangeLow: 0, rangeHigh: 10 }));
    const now = Date.UTC(2026, 0, 1);
    const s1 = p.process(2, now, 'good', now);
    expect(s1).toEqual({ tagId: 7, ts: now, value: 5, quality: 0 });
    const s2 = p.process(6, now + 1, 'good', now);
    expect(isSample(s2) && qualityFlags(s2.quality)).toEqual(['outOfRange']);
    const s3 = p.process(1, now + 2, 'uncertain', now);
    expect(isSample(s3) && [qualityGrade(s3.quality), qualityFlags(s3.quality)]).toEqual(['uncertain', ['sourceStatus']]);
    const s4 = p.process(null, now + 3, 'bad', now);
    expect(s4).toMatchObject({ value: null });
    expect(isSample(s4) && qualityGrade(s4.quality)).toBe('bad');
    expect(p.process(null, now + 4, 'good', now)).toEqual({ reason: 'null value without bad quality' });
    const future = p.process(1, now + 3_600_000, 'good', now);
    expect(isSample(future) && (future.quality & QUALITY_FLAG.clockSkew) !== 0).toBe(true);
  });
  it('flags a value unchanged longer than the flat-line window', () => {
    const p = new TagProcessor(tag({ expectedPeriod_s: 1 }), { flatLinePeriods: 600, futureSkewMs: 1e12, deadbandMaxPeriods: 10 });
    const t0 = 0;
    expect(p.process(3, t0, 'good', t0)).toMatchObject({ quality: 0 });
    expect(p.process(3, t0 + 599_000, 'good', t0)).toMatchObject({ quality: 0 });
    const late = p.process(3, t0 + 600_000, 'good', t0);
    expect(isSample(late) && qualityFlags(late.quality)).toEqual(['flatLine']);
    expect(p.process(4, t0 + 600_001, 'good', t0)).toMatchObject({ quality: 0 });
  });
  it('never flags a state or counter tag flat-lined (a pump-running state holds still by nature)', () => {
    for (const kind of ['state', 'counter'] as const) {
      const p = new TagProcessor(tag({ expectedPeriod_s: 1, kind }), { flatLinePeriods: 600, futureSkewMs: 1e12, deadbandMaxPeriods: 10 });
      expect(p.process(1, 0, 'good', 0)).toMatchObject({ quality: 0 });
      // Held for ten times the analog window: still good.
      expect(p.process(1, 6_000_000, 'good', 0)).toMatchObject({ quality: 0 });
    }
  });
  it('drops samples inside the deadband but stores one per max interval', () => {
    const p = new TagProcessor(tag({ deadband: 0.5, expectedPeriod_s: 1 }));
    expect(p.process(1, 0, 'good', 0)).not.toBeNull();
    expect(p.process(1.2, 1000, 'good', 0)).toBeNull();
    expect(p.process(1.6, 2000, 'good', 0)).not.toBeNull();
    expect(p.process(1.7, 12_000, 'good', 0)).not.toBeNull();
  });
  it('dead-letters a scaled value that overflows', () => {
    const p = new TagProcessor(tag({ scaleGain: 1e308 }));
    expect(p.process(1e10, 0, 'good', 0)).toHaveProperty('reason');
  });
});

describe('rollup aggregation', () => {
  it('merges min/max/sum/count/last and leaves Bad samples out', () => {
    const rows = aggregate(
      [
        { tagId: 1, ts: 1_000, value: 2, quality: 0 },
        { tagId: 1, ts: 59_000, value: 5, quality: 1 | QUALITY_FLAG.outOfRange },
        { tagId: 1, ts: 30_000, value: -1, quality: 0 },
        { tagId: 1, ts: 40_000, value: 99, quality: 2 },
        { tagId: 1, ts: 61_000, value: 7, quality: 0 },
      ],
      60_000,
    );
    expect(rows).toEqual([
      { tagId: 1, bucket: 0, min: -1, max: 5, sum: 6, count: 3, last: 5, lastTs: 59_000, quality: 1 | QUALITY_FLAG.outOfRange },
      { tagId: 1, bucket: 60_000, min: 7, max: 7, sum: 7, count: 1, last: 7, lastTs: 61_000, quality: 0 },
    ]);
  });
});

describe('rollup merge into coarser buckets', () => {
  it('hours merged from minute rows equal hours aggregated from the samples (seeded mix of tags, times and grades)', () => {
    const rnd = mulberry32(7);
    const samples = Array.from({ length: 5_000 }, () => ({
      tagId: 1 + Math.floor(rnd() * 7),
      ts: Math.floor(rnd() * 3 * 3_600_000),
      value: rnd() < 0.02 ? null : Math.round((rnd() * 200 - 100) * 8) / 8, // eighths: sums exact in float
      quality: [0, 0, 0, 1, 2, 1 | QUALITY_FLAG.outOfRange][Math.floor(rnd() * 6)]!,
    }));
    const key = (r: { tagId: number; bucket: number }) => r.tagId * 1e9 + r.bucket;
    const direct = aggregate(samples, 3_600_000).sort((a, b) => key(a) - key(b));
    const merged = mergeInto(aggregate(samples, 60_000), 3_600_000).sort((a, b) => key(a) - key(b));
    expect(merged).toEqual(direct);
    expect(direct.length).toBe(7 * 3);
  });
});

describe('binary COPY encoding', () => {
  it('writes the PGCOPY signature, 4 fields per row, null as length −1 and the trailer', () => {
    const b = encodeSamplesBinary([{ tagId: 5, ts: 946_684_800_001, value: null, quality: 2 }]);
    expect(b.subarray(0, 11).toString('latin1')).toBe('PGCOPY\n\xff\r\n\0');
    expect(b.readInt16BE(19)).toBe(4);
    expect(b.readInt32BE(25)).toBe(5);
    expect(b.readInt32BE(33) * 2 ** 32 + b.readUInt32BE(37)).toBe(1000); // 1 ms after 2000-01-01 in µs
    expect(b.readInt32BE(41)).toBe(-1);
    expect(b.readInt16BE(b.length - 2)).toBe(-1);
  });
});

describe('spool', () => {
  it('replays appended records in order and ignores a torn tail', async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'spool-'));
    const s = await Spool.open(dir);
    await s.append({ samples: [{ tagId: 1, ts: 1, value: 1.5, quality: 0 }], deadLetters: [] });
    await s.append({ samples: [{ tagId: 1, ts: 2, value: null, quality: 2 }], deadLetters: [{ ts: 3, sourceId: 1, address: 'a', payload: 'x', payloadBytes: 1, reason: 'r', key: 'k3' }] });
    await s.close();
    const file = path.join(dir, fs.readdirSync(dir)[0]!);
    fs.appendFileSync(file, Buffer.from([200, 0, 0, 0, 1, 2, 3])); // a record cut short by a crash
    const again = await Spool.open(dir);
    const seen: number[] = [];
    await again.replay(async (recs) => {
      for (const r of recs) for (const x of r.samples) seen.push(x.ts);
    });
    expect(seen).toEqual([1, 2]);
    expect(again.isEmpty).toBe(true);
    expect(fs.readdirSync(dir)).toEqual([]);
  });
});
