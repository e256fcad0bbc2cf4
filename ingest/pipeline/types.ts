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

export function deadLetter(sourceId: number | null, address: string | null, payload: Buffer | string, reason: string, now = Date.now()): DeadLetter {
  const bytes = typeof payload === 'string' ? Buffer.byteLength(payload) : payload.length;
  const head = typeof payload === 'string' ? payload.slice(0, DEAD_LETTER_PAYLOAD_MAX) : payload.subarray(0, DEAD_LETTER_PAYLOAD_MAX).toString('utf8');
  // Every text column through pgText: a parse error's message quotes the payload, NUL included,
  // and a topic may carry anything the broker let through.
  return {
    ts: now,
    sourceId,
    address: pgTextOrNull(address, DEAD_LETTER_ADDRESS_MAX),
    payload: pgText(head, DEAD_LETTER_PAYLOAD_MAX),
    payloadBytes: bytes,
    reason: pgText(reason, DEAD_LETTER_REASON_MAX),
  };
}
