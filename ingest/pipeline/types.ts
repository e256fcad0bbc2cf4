import { createHash } from 'node:crypto';
import { DEAD_LETTER_ADDRESS_MAX, DEAD_LETTER_REASON_MAX, pgText, pgTextOrNull } from './pg-text.ts';

/** One stored sample: tag, epoch milliseconds (UTC), engineering value (null when bad), quality code. */
export interface Sample {
  tagId: number;
  ts: number;
  value: number | null;
  quality: number;
}

/** A message the pipeline could not decode, kept with the reason (never dropped silently). */
export interface DeadLetter {
  ts: number;
  sourceId: number | null;
  address: string | null;
  /** The payload as text, truncated to DEAD_LETTER_PAYLOAD_MAX characters. */
  payload: string;
  /** Size of the original payload in bytes. */
  payloadBytes: number;
  reason: string;
  /**
   * Delivery identity (hex SHA-256, deliveryKey): equal for the same finding in the same
   * delivery however often it arrives — a QoS 1 message the broker sends again after a lost
   * PUBACK (MQTT 3.1.1 §4.4, MQTT 5.0 §4.4; a restored broker queue resends it under a new packet
   * identifier, so the packet identifier cannot tell), or the same bad payload published again.
   * `dead_letters.delivery_key` is unique on it: a second arrival counts up `times_seen`.
   */
  key: string;
}

/** Per-tag settings the pipeline needs (a projection of the `tags` row). */
export interface TagConfig {
  id: number;
  sourceId: number;
  address: string;
  scaleGain: number;
  scaleOffset: number;
  deadband: number;
  expectedPeriod_s: number;
  rangeLow: number | null;
  rangeHigh: number | null;
  samplingInterval_ms: number | null;
  /** analog | state | counter: only an analog value is checked for a flat line (a state or a count holds still by nature). */
  kind: 'analog' | 'state' | 'counter';
}

export const DEAD_LETTER_PAYLOAD_MAX = 4096;

/**
 * SHA-256 (FIPS 180-4) over the parts, each written with its length, so no two different lists
 * of parts give the same input (["ab", "c"] and ["a", "bc"] differ). Hex.
 */
export function deliveryKey(...parts: readonly (string | number | null | Buffer)[]): string {
  const h = createHash('sha256');
  for (const p of parts) {
    const b = p === null ? Buffer.alloc(0) : Buffer.isBuffer(p) ? p : Buffer.from(typeof p === 'number' ? `#${p}` : `'${p}`, 'utf8');
    h.update(`${p === null ? -1 : b.length}:`);
    h.update(b);
  }
  return h.digest('hex');
}

/**
 * A dead letter. `delivery` names what arrived — for MQTT the digest of the message's bytes
 * (mqttDelivery), for OPC UA the node, source timestamp and status (opcuaDelivery); the key adds
 * the source, the address (a batch message's item topic, a Sparkplug metric) and the reason, and
 * keyByDelivery numbers findings of one delivery still equal. The stored payload is not part of it: an OPC UA value's text carries the server's
 * own timestamp, which a resent notification may change. Without a `delivery` the letter is
 * identified by its receipt (`now` to the millisecond): it is never counted as seen again.
 */
export function deadLetter(sourceId: number | null, address: string | null, payload: Buffer | string, reason: string, now = Date.now(), delivery?: string): DeadLetter {
  const bytes = typeof payload === 'string' ? Buffer.byteLength(payload) : payload.length;
  const head = typeof payload === 'string' ? payload.slice(0, DEAD_LETTER_PAYLOAD_MAX) : payload.subarray(0, DEAD_LETTER_PAYLOAD_MAX).toString('utf8');
  // Every text column through pgText: a parse error's message quotes the payload, NUL included,
  // and a topic may carry anything the broker let through.
  const letter = {
    ts: now,
    sourceId,
    address: pgTextOrNull(address, DEAD_LETTER_ADDRESS_MAX),
    payload: pgText(head, DEAD_LETTER_PAYLOAD_MAX),
    payloadBytes: bytes,
    reason: pgText(reason, DEAD_LETTER_REASON_MAX),
  };
  return { ...letter, key: delivery === undefined ? receiptKey(letter) : letterKey(delivery, letter) };
}

/** The identity of one receipt of a dead letter (receive time to the millisecond and its fields): for letters made without a delivery identity, and those of spool files written before keys existed. */
export function receiptKey(d: Omit<DeadLetter, 'key'>): string {
  return deliveryKey('receipt', d.ts, d.sourceId, d.address, d.payload, d.reason);
}

/** The delivery identity of an MQTT message: its topic and a digest of its bytes as received. */
export function mqttDelivery(topic: string, payload: Buffer): string {
  return deliveryKey('mqtt', topic, createHash('sha256').update(payload).digest());
}

/**
 * The delivery identity of an OPC UA value: the node, the value's SourceTimestamp (ms, or the
 * ServerTimestamp when the server gives none) and its StatusCode. A notification a server sends
 * again, or one read back from history after a takeover, carries the same three (OPC 10000-4,
 * DataValue: the SourceTimestamp is when the source took the value).
 */
export function opcuaDelivery(nodeId: string, ts: number, statusCode: number): string {
  return deliveryKey('opcua', nodeId, ts, statusCode);
}

/**
 * Gives the letters that one delivery produced (an MQTT message: its bad items, its Sparkplug
 * metrics) their keys. Letters still equal — bad items of one batch message on one topic with
 * one reason — are several findings, not one seen again: the second and later get their ordinal,
 * so a redelivery of the message maps each to the same row again.
 */
export function keyByDelivery(letters: DeadLetter[], delivery: string): void {
  const seen = new Map<string, number>();
  for (let i = 0; i < letters.length; i++) {
    const d = letters[i]!;
    const key = letterKey(delivery, d);
    const n = seen.get(key) ?? 0;
    seen.set(key, n + 1);
    letters[i] = { ...d, key: n ? deliveryKey('ordinal', key, n) : key };
  }
}

function letterKey(delivery: string, d: Pick<DeadLetter, 'sourceId' | 'address' | 'reason'>): string {
  return deliveryKey('delivery', delivery, d.sourceId, d.address, d.reason);
}
