import type { MqttPayloadFormat } from '../../shared/contracts/wiring.ts';
import { batchItem, batchPayload, isoTimestampPattern, singleValuePayload, type PayloadQuality } from '../../shared/contracts/mqtt-payload.ts';

/** The Sparkplug B topic namespace element (Eclipse Sparkplug 3.0 §4.1.1, tck-id-topic-structure-namespace-a). */
export const SPARKPLUG_NAMESPACE = 'spBv1.0';

/**
 * Which decoder a message goes to, from the source's `payload` option
 * (shared/contracts/wiring.ts): Sparkplug B for every topic under `spBv1.0/` (the namespace is
 * mandatory, §4.1, so the topic identifies the encoding even with the default `json`); JSON for
 * the rest, or, on a `sparkplugB` source, nothing (`other`: counted, not decoded).
 */
export function payloadDecoder(topic: string, format: MqttPayloadFormat): 'json' | 'sparkplugB' | 'other' {
  if (topic.startsWith(SPARKPLUG_NAMESPACE) && topic.charCodeAt(SPARKPLUG_NAMESPACE.length) === 0x2f /* / */) return 'sparkplugB';
  return format === 'sparkplugB' ? 'other' : 'json';
}

/** One decoded reading before mapping and scaling. `ts` is epoch ms or undefined (use receive time). */
export interface DecodedItem {
  topic: string;
  v: number | null;
  ts: number | undefined;
  q: PayloadQuality;
}

export type DecodeResult =
  | { ok: true; items: DecodedItem[]; errors: { index: number; reason: string; item: unknown }[] }
  | { ok: false; reason: string };

/** Upper bound for one MQTT payload we try to parse; larger ones are dead-lettered unparsed. */
export const MAX_PAYLOAD_BYTES = 16 * 1024 * 1024;

const PLAIN_NUMBER = /^\s*[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*$/;

function zodReason(issues: readonly { path: readonly PropertyKey[]; message: string }[]): string {
  return issues
    .slice(0, 3)
    .map((i) => `${i.path.map(String).join('.') || '(root)'}: ${i.message}`)
    .join('; ');
}

function toMs(ts: string | undefined): number | undefined {
  return ts === undefined ? undefined : isoToMs(ts);
}

const digit = (s: string, i: number) => s.charCodeAt(i) - 48;

/**
 * Epoch milliseconds of a timestamp that isoTimestampPattern (zod's ISO 8601 check) has already
 * accepted. The layout publishers send almost always — `YYYY-MM-DDTHH:MM:SSZ` or with exactly
 * three fraction digits, UTC — is read by position, without Date.parse (Date.parse was about a
 * quarter of the decoder's time in the single-value phase of tests/bench/ingest.bench.ts); any
 * other accepted form (offsets, other fraction lengths, years below 100, which Date.UTC would
 * read as 19xx) goes to Date.parse.
 * tests/unit/ingest/decode-fast.test.ts checks both give the same instant.
 */
export function isoToMs(ts: string): number {
  const n = ts.length;
  if (ts.charCodeAt(n - 1) === 0x5a /* Z */ && (n === 20 || (n === 24 && ts.charCodeAt(19) === 0x2e))) {
    const year = digit(ts, 0) * 1000 + digit(ts, 1) * 100 + digit(ts, 2) * 10 + digit(ts, 3);
    if (year >= 100) {
      return Date.UTC(
        year,
        digit(ts, 5) * 10 + digit(ts, 6) - 1,
        digit(ts, 8) * 10 + digit(ts, 9),
        digit(ts, 11) * 10 + digit(ts, 12),
        digit(ts, 14) * 10 + digit(ts, 15),
        digit(ts, 17) * 10 + digit(ts, 18),
        n === 24 ? digit(ts, 20) * 100 + digit(ts, 21) * 10 + digit(ts, 22) : 0,
      );
    }
  }
  return Date.parse(ts);
}

/**
 * Hand-written check of one reading against the contract's zod schema (singleValuePayload when
 * `topic` is given, else batchItem): the same rules — only the known keys, v finite or null (null
 * only with q "bad"), ts by zod's own pattern, q one of three words, topic 1–512 characters —
 * at about half zod's cost per item (0.25 against 0.52 µs measured here), which counts at
 * 200 000 readings a second. It returns null for anything it does not accept and the caller then
 * asks zod, so zod stays the single source of the error messages;
 * tests/unit/ingest/decode-fast.test.ts checks that both accept exactly the same readings.
 */
export function fastReading(x: unknown, topic?: string): DecodedItem | null {
  if (typeof x !== 'object' || x === null || Array.isArray(x)) return null;
  const o = x as Record<string, unknown>;
  for (const k in o) {
    if (k !== 'v' && k !== 'ts' && k !== 'q' && (topic !== undefined || k !== 'topic')) return null;
  }
  const t = topic ?? o.topic;
  if (typeof t !== 'string' || (topic === undefined && (t.length < 1 || t.length > 512))) return null;
  const v = o.v;
  if (!(v === null || (typeof v === 'number' && Number.isFinite(v)))) return null;
  const q = o.q;
  if (q !== undefined && q !== 'good' && q !== 'uncertain' && q !== 'bad') return null;
  if (v === null && q !== 'bad') return null;
  const ts = o.ts;
  if (ts !== undefined && (typeof ts !== 'string' || !isoTimestampPattern.test(ts))) return null;
  return { topic: t, v, ts: toMs(ts as string | undefined), q: q ?? 'good' };
}

/** JSON's insignificant whitespace (RFC 8259 §2): space, line feed, carriage return, tab. */
function isJsonSpace(c: number): boolean {
  return c === 0x20 || c === 0x0a || c === 0x0d || c === 0x09;
}

/**
 * True when a payload on a topic no tag maps could still carry mapped samples (a batch names
 * each item's topic). Payloads on unmapped topics that are not batches are counted as unmapped,
 * not decoded and not dead-lettered: a broker subscription on `#` sees other systems' traffic.
 */
export function looksLikeBatch(payload: Buffer): boolean {
  let i = 0;
  while (i < payload.length && isJsonSpace(payload[i]!)) i++;
  if (payload[i] !== 0x7b /* { */) return false;
  return payload.subarray(i, i + 64).includes('"samples"');
}

/** The first character that String.prototype.trimStart would keep (JSON and plain numbers start with ASCII). */
function firstNonSpace(text: string): string | undefined {
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (!isJsonSpace(c)) return c < 0x80 ? text[i] : text.slice(i).trimStart()[0];
  }
  return undefined;
}

/**
 * Decodes Flocstream's MQTT payload formats (shared/contracts/mqtt-payload.ts): a single JSON
 * value, a batch, or a plain number. Returns a result instead of throwing (hot path). A batch
 * whose envelope is valid but some items are not yields the good items plus per-item errors,
 * so one bad reading does not discard its neighbours.
 */
export function decodePayload(topic: string, payload: Buffer): DecodeResult {
  if (payload.length === 0) return { ok: false, reason: 'empty payload' };
  if (payload.length > MAX_PAYLOAD_BYTES) return { ok: false, reason: `payload of ${payload.length} bytes exceeds ${MAX_PAYLOAD_BYTES}` };
  const text = payload.toString('utf8');
  if (firstNonSpace(text) !== '{') {
    if (!PLAIN_NUMBER.test(text)) return { ok: false, reason: 'not JSON and not a plain number' };
    const v = Number(text);
    if (!Number.isFinite(v)) return { ok: false, reason: 'plain number is not finite' };
    return { ok: true, items: [{ topic, v, ts: undefined, q: 'good' }], errors: [] };
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (err) {
    return { ok: false, reason: `invalid JSON: ${(err as Error).message.slice(0, 200)}` };
  }
  if (json !== null && typeof json === 'object' && 'samples' in json) {
    const arr0 = (json as { samples: unknown }).samples;
    if (Array.isArray(arr0) && arr0.length > 0 && arr0.length <= 100_000 && Object.keys(json).length === 1) {
      const fast: DecodedItem[] = [];
      for (const item of arr0) {
        const r = fastReading(item);
        if (!r) break;
        fast.push(r);
      }
      if (fast.length === arr0.length) return { ok: true, items: fast, errors: [] };
    }
    const whole = batchPayload.safeParse(json);
    if (whole.success) {
      return {
        ok: true,
        items: whole.data.samples.map((s) => ({ topic: s.topic, v: s.v, ts: toMs(s.ts), q: s.q ?? 'good' })),
        errors: [],
      };
    }
    const arr = (json as { samples: unknown }).samples;
    if (!Array.isArray(arr) || arr.length === 0 || arr.length > 100_000 || Object.keys(json).length !== 1) {
      return { ok: false, reason: `invalid batch: ${zodReason(whole.error.issues)}` };
    }
    const items: DecodedItem[] = [];
    const errors: { index: number; reason: string; item: unknown }[] = [];
    for (let i = 0; i < arr.length; i++) {
      const r = batchItem.safeParse(arr[i]);
      if (r.success) items.push({ topic: r.data.topic, v: r.data.v, ts: toMs(r.data.ts), q: r.data.q ?? 'good' });
      else errors.push({ index: i, reason: `batch item ${i}: ${zodReason(r.error.issues)}`, item: arr[i] });
    }
    return { ok: true, items, errors };
  }
  const fast = fastReading(json, topic);
  if (fast) return { ok: true, items: [fast], errors: [] };
  const single = singleValuePayload.safeParse(json);
  if (!single.success) return { ok: false, reason: `invalid value: ${zodReason(single.error.issues)}` };
  return { ok: true, items: [{ topic, v: single.data.v, ts: toMs(single.data.ts), q: single.data.q ?? 'good' }], errors: [] };
}
