import type { Sample } from '../pipeline/types.ts';

/**
 * Encodes samples as PostgreSQL binary COPY (PostgreSQL 15 documentation, "COPY — Binary
 * Format"): 11-byte signature, flags and header-extension length, then per tuple a 16-bit field
 * count and each field as a 32-bit length plus its network-order value; a −1 field count ends it.
 * Columns: tag_id int4, ts timestamptz (int8 µs since 2000-01-01 UTC), value float8, quality int2.
 * Binary avoids formatting and re-parsing timestamps and doubles as text on both sides.
 */
const SIGNATURE = Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1');
const PG_EPOCH_MS = 946_684_800_000;
const ROW_BYTES = 2 + (4 + 4) + (4 + 8) + (4 + 8) + (4 + 2);

export function encodeSamplesBinary(samples: readonly Sample[]): Buffer {
  const buf = Buffer.allocUnsafe(SIGNATURE.length + 8 + samples.length * ROW_BYTES + 2);
  SIGNATURE.copy(buf, 0);
  let o = SIGNATURE.length;
  buf.writeInt32BE(0, o);
  buf.writeInt32BE(0, o + 4);
  o += 8;
  for (const s of samples) {
    buf.writeInt16BE(4, o);
    buf.writeInt32BE(4, o + 2);
    buf.writeInt32BE(s.tagId, o + 6);
    buf.writeInt32BE(8, o + 10);
    // µs fit in 53 bits for any date within ±285 years of 2000: split without BigInt.
    const us = Math.round((s.ts - PG_EPOCH_MS) * 1000);
    const hi = Math.floor(us / 4_294_967_296);
    buf.writeInt32BE(hi, o + 14);
    buf.writeUInt32BE(us - hi * 4_294_967_296, o + 18);
    if (s.value === null) {
      buf.writeInt32BE(-1, o + 22);
      o += 26;
    } else {
      buf.writeInt32BE(8, o + 22);
      buf.writeDoubleBE(s.value, o + 26);
      o += 34;
    }
    buf.writeInt32BE(2, o);
    buf.writeInt16BE(s.quality, o + 4);
    o += 6;
  }
  buf.writeInt16BE(-1, o);
  return buf.subarray(0, o + 2);
}
