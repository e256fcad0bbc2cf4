/**
 * Text as PostgreSQL will store it. A `text` value cannot hold the character NUL (U+0000:
 * "invalid byte sequence for encoding UTF8: 0x00", SQLSTATE 22021; PostgreSQL documentation,
 * "Character Types"), and a lone UTF-16 surrogate has no UTF-8 form at all (Unicode 15.0 §3.9,
 * D91). Either would make PostgreSQL refuse the row, and with it the transaction that carries a
 * batch of good samples. NUL becomes the two characters `\0` (still readable in a dead letter),
 * a lone surrogate U+FFFD, and the result is cut to `max` UTF-16 code units without splitting a
 * surrogate pair.
 */
export function pgText(s: string, max: number): string {
  let out = s.includes('\u0000') ? s.replaceAll('\u0000', '\\0') : s;
  out = out.replace(LONE_SURROGATE, '\uFFFD');
  if (out.length > max) {
    out = out.slice(0, max);
    // A pair cut in half leaves its high surrogate at the end.
    const last = out.charCodeAt(out.length - 1);
    if (last >= 0xd800 && last <= 0xdbff) out = out.slice(0, -1);
  }
  return out;
}

/** Same as pgText for a nullable column. */
export function pgTextOrNull(s: string | null | undefined, max: number): string | null {
  return s === null || s === undefined ? null : pgText(s, max);
}

const LONE_SURROGATE = /[\uD800-\uDBFF](?![\uDC00-\uDFFF])|(?<![\uD800-\uDBFF])[\uDC00-\uDFFF]/g;

/** Longest dead-letter reason and address (topic or node id) stored, in UTF-16 code units. */
export const DEAD_LETTER_REASON_MAX = 1000;
export const DEAD_LETTER_ADDRESS_MAX = 1024;
