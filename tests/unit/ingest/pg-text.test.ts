import { describe, expect, it } from 'vitest';
import { pgText } from '../../../ingest/pipeline/pg-text.ts';
import { deadLetter } from '../../../ingest/pipeline/types.ts';

// PostgreSQL refuses NUL in text (documentation, "Character Types": "the character with code zero
// cannot be stored") and UTF-8 has no encoding for a lone surrogate (Unicode 15.0 §3.9, D91/D92).
const storable = (s: string) => !s.includes('\u0000') && !/[\uD800-\uDBFF](?![\uDC00-\uDFFF])|(?<![\uD800-\uDBFF])[\uDC00-\uDFFF]/.test(s);

describe('pgText', () => {
  it('writes NUL as the two characters \\0 and a lone surrogate as U+FFFD, keeps pairs', () => {
    expect(pgText('a\u0000b', 100)).toBe('a\\0b');
    expect(pgText('x\uD800y\uDC00z', 100)).toBe('x\uFFFDy\uFFFDz');
    expect(pgText('pair 😀 kept', 100)).toBe('pair 😀 kept');
  });

  it('caps the length without leaving half a surrogate pair', () => {
    expect(pgText('abc😀', 4)).toBe('abc'); // 😀 is two code units; cutting at 4 would split it
    expect(pgText('abcdef', 3)).toBe('abc');
  });

  it("deadLetter() cleans the reason and the topic too: a JSON parse error quotes the payload's NUL", () => {
    const payload = Buffer.from('{"v":tru\u0000}', 'utf8');
    let reason = '';
    try {
      JSON.parse(payload.toString('utf8'));
    } catch (err) {
      reason = `invalid JSON: ${(err as Error).message}`;
    }
    // V8's message quotes the offending text (this is what let the NUL through before)
    expect(reason).toContain('\u0000');
    const d = deadLetter(1, 'plant/\u0000/\uD800', payload, reason);
    expect(storable(d.reason)).toBe(true);
    expect(storable(d.address!)).toBe(true);
    expect(storable(d.payload)).toBe(true);
    expect(d.reason).toContain('\\0');
    expect(deadLetter(1, null, 'x', 'r'.repeat(5000)).reason).toHaveLength(1000);
  });
});
