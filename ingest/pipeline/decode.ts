import { batchItem, batchPayload, singleValuePayload, type PayloadQuality } from '../../shared/contracts/mqtt-payload.ts';

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
  return ts === undefined ? undefined : Date.parse(ts);
}

/**
 * True when a payload on a topic no tag maps could still carry mapped samples (a batch names
 * each item's topic). Payloads on unmapped topics that are not batches are counted as unmapped,
 * not decoded and not dead-lettered: a broker subscription on `#` sees other systems' traffic.
 */
export function looksLikeBatch(payload: Buffer): boolean {
  let i = 0;
  while (i < payload.length && (payload[i] === 0x20 || payload[i] === 0x0a || payload[i] === 0x0d || payload[i] === 0x09)) i++;
  if (payload[i] !== 0x7b /* { */) return false;
  return payload.subarray(i, i + 64).includes('"samples"');
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
  const first = text.trimStart()[0];
  if (first !== '{') {
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
  const single = singleValuePayload.safeParse(json);
  if (!single.success) return { ok: false, reason: `invalid value: ${zodReason(single.error.issues)}` };
  return { ok: true, items: [{ topic, v: single.data.v, ts: toMs(single.data.ts), q: single.data.q ?? 'good' }], errors: [] };
}
