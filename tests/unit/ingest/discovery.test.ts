import { describe, expect, it } from 'vitest';
import { Discovery, PAYLOAD_PREVIEW } from '../../../ingest/mqtt/discovery.ts';

describe('MQTT discovery: what each heartbeat saves', () => {
  it('drains only topics seen since the last drain, with their message counts, last payload and first/last time', () => {
    const d = new Discovery();
    d.see('kb/ab1/mlss', Buffer.from('{"v":3.1}'), 4, 1_000);
    d.see('kb/ab1/mlss', Buffer.from('{"v":3.2}'), 4, 2_000);
    d.see('kb/ab2/x', '7.5', null, 1_500);
    expect(d.drain()).toEqual([
      { topic: 'kb/ab1/mlss', lastPayload: '{"v":3.2}', firstSeen: 1_000, lastSeen: 2_000, count: 2, tagId: 4 },
      { topic: 'kb/ab2/x', lastPayload: '7.5', firstSeen: 1_500, lastSeen: 1_500, count: 1, tagId: null },
    ]);
    expect(d.drain()).toEqual([]);
    d.see('kb/ab2/x', { topic: 'kb/ab2/x', v: 8 }, 9, 3_000);
    expect(d.drain()).toEqual([{ topic: 'kb/ab2/x', lastPayload: '{"topic":"kb/ab2/x","v":8}', firstSeen: 1_500, lastSeen: 3_000, count: 1, tagId: 9 }]);
    expect(d.size).toBe(2);
  });

  it('a failed save is put back and carried by the next drain, counts added to what arrived meanwhile', () => {
    const d = new Discovery();
    for (let i = 0; i < 5; i++) d.see('t', 'x', null, i);
    const lost = d.drain();
    d.see('t', 'y', null, 10);
    d.restore(lost);
    // 5 drained and put back + 1 since = 6 messages, none lost or counted twice.
    expect(d.drain()).toEqual([{ topic: 't', lastPayload: 'y', firstSeen: 0, lastSeen: 10, count: 6, tagId: null }]);
  });

  it('previews at most 256 characters of a payload and stops listing new topics past 5 000 (counted as overflow)', () => {
    const d = new Discovery();
    d.see('big', Buffer.alloc(10_000, 'a'), null, 0);
    expect(d.drain()[0]!.lastPayload).toHaveLength(PAYLOAD_PREVIEW);
    for (let i = 0; i < 5_010; i++) d.see(`t/${i}`, '1', null, 0);
    expect(d.size).toBe(5_000);
    expect(d.overflow).toBe(11);
  });
});
