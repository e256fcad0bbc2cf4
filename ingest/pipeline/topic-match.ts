/**
 * Topic → tag lookup: exact topics in a hash map, filters with wildcards checked level by level.
 * Wildcard rules are those of MQTT 5.0 §4.7.1 (also MQTT 3.1.1 §4.7.1): `+` matches exactly one
 * level, `#` (only as the last level) matches the parent level and any number of child levels,
 * and per §4.7.2 a filter starting with a wildcard does not match topics beginning with `$`.
 */
export interface TopicFilterError {
  error: string;
}

/** Validates a topic filter per MQTT 5.0 §4.7.1 and returns its levels, or an error (no throw). */
export function parseTopicFilter(filter: string): string[] | TopicFilterError {
  if (filter.length === 0 || Buffer.byteLength(filter) > 65535) return { error: 'topic filter must be 1–65535 bytes' };
  if (filter.includes('\u0000')) return { error: 'topic filter must not contain NUL' };
  const levels = filter.split('/');
  for (let i = 0; i < levels.length; i++) {
    const l = levels[i]!;
    if (l.includes('#') && (l !== '#' || i !== levels.length - 1)) return { error: '"#" must be the last level on its own' };
    if (l.includes('+') && l !== '+') return { error: '"+" must occupy a whole level' };
  }
  return levels;
}

export function isWildcard(filter: string): boolean {
  return filter.includes('+') || filter.includes('#');
}

export function topicMatches(levels: readonly string[], topic: string): boolean {
  if (topic.startsWith('$') && (levels[0] === '+' || levels[0] === '#')) return false;
  const t = topic.split('/');
  for (let i = 0; i < levels.length; i++) {
    const f = levels[i]!;
    if (f === '#') return true;
    if (i >= t.length) return false;
    if (f !== '+' && f !== t[i]) return false;
  }
  return t.length === levels.length;
}

export class TopicMap<T> {
  private exact = new Map<string, T>();
  private patterns: { levels: string[]; value: T; filter: string }[] = [];
  /** Memo of pattern lookups; cleared on every change. Bounded so a topic storm cannot grow it. */
  private memo = new Map<string, T | null>();

  constructor(entries: Iterable<[string, T]> = []) {
    for (const [k, v] of entries) this.add(k, v);
  }

  /** Adds a mapping; returns an error for an invalid filter instead of throwing. */
  add(filter: string, value: T): TopicFilterError | null {
    const levels = parseTopicFilter(filter);
    if (!Array.isArray(levels)) return levels;
    this.memo.clear();
    if (isWildcard(filter)) this.patterns.push({ levels, value, filter });
    else this.exact.set(filter, value);
    return null;
  }

  /** Exact topic wins over a pattern; among patterns the first added wins. */
  get(topic: string): T | undefined {
    const e = this.exact.get(topic);
    if (e !== undefined) return e;
    if (this.patterns.length === 0) return undefined;
    const m = this.memo.get(topic);
    if (m !== undefined) return m ?? undefined;
    let found: T | null = null;
    for (const p of this.patterns) {
      if (topicMatches(p.levels, topic)) {
        found = p.value;
        break;
      }
    }
    if (this.memo.size > 50_000) this.memo.clear();
    this.memo.set(topic, found);
    return found ?? undefined;
  }

  get size(): number {
    return this.exact.size + this.patterns.length;
  }
}
