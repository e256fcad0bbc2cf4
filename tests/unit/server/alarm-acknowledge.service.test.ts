import { describe, expect, it } from 'vitest';
import type { AlarmOut } from '../../../shared/contracts/alarm.ts';
import { ConflictError, ForbiddenError, NotFoundError } from '../../../server/http/errors.ts';
import type { AlarmRow } from '../../../server/repositories/alarm.repository.ts';
import { createAlarmService } from '../../../server/services/alarm.service.ts';
import { fakeAudit, fakeClock, operator, scopedToken } from './service-fakes.ts';

const RAISED_AT = Date.parse('2026-12-02T03:00:00Z');

/** The alarms table in memory with the acknowledge rule of alarm.repository.ts: once only; a cleared alarm stays cleared. */
function fakeAlarmRepo(rows: AlarmRow[]) {
  return {
    rows,
    async open(plantId: number) {
      return rows.filter((r) => r.plantId === plantId && r.state !== 'cleared');
    },
    async get(plantId: number, id: number) {
      return rows.find((r) => r.plantId === plantId && r.id === id) ?? null;
    },
    async raise(): Promise<AlarmRow | null> {
      throw new Error('not used here');
    },
    async clear(): Promise<AlarmRow | null> {
      throw new Error('not used here');
    },
    async annunciate(): Promise<AlarmRow | null> {
      throw new Error('not used here');
    },
    async shelve(): Promise<AlarmRow | null> {
      throw new Error('not used here');
    },
    async byId(id: number) {
      return rows.find((r) => r.id === id) ?? null;
    },
    async tagStarts(): Promise<Map<string, number>> {
      throw new Error('not used here');
    },
    async raisedPerBucket(): Promise<{ bucket: number; raised: number; suppressed: number }[]> {
      throw new Error('not used here');
    },
    async acknowledge(plantId: number, id: number, userId: number, at: Date) {
      const r = rows.find((x) => x.plantId === plantId && x.id === id && x.acknowledgedAt === null);
      if (!r) return null;
      Object.assign(r, { acknowledgedAt: at, acknowledgedBy: userId, state: r.state === 'cleared' ? 'cleared' : 'acknowledged' });
      return r;
    },
  };
}

const row = (id: number, state: AlarmRow['state'], clearedAt: Date | null = null): AlarmRow => ({
  id,
  plantId: 1,
  rule: 'blanket-high',
  target: 'fc1',
  priority: 2,
  state,
  message: 'Sludge blanket in fc1 at 2.10 m above the floor (limit 1.80 m)',
  value: 2.1,
  limit: 1.8,
  raisedAt: new Date(RAISED_AT),
  acknowledgedAt: null,
  acknowledgedBy: null,
  clearedAt,
  suppressedReason: null,
  shelvedUntil: null,
  shelvedBy: null,
  shelveReason: null,
});

function setup() {
  const alarmRepo = fakeAlarmRepo([row(1, 'raised'), row(2, 'cleared', new Date(RAISED_AT + 600_000))]);
  const audit = fakeAudit();
  const clock = fakeClock(Date.parse('2026-12-02T03:12:30Z'));
  const changes: Array<[AlarmOut, string]> = [];
  const svc = createAlarmService({ alarmRepo, audit, clock, changed: (a, c) => void changes.push([a, c]) });
  return { alarmRepo, audit, clock, changes, svc };
}

describe('alarm acknowledge with a fake repository and an injected clock (ISA-18.2 states)', () => {
  it('an active alarm becomes acknowledged with who and the injected time; audited with the comment; the change is announced', async () => {
    const { audit, changes, svc } = setup();
    const out = await svc.acknowledge(operator, 1, 1, 'blanket rising after storm, RAS raised');
    expect(out).toMatchObject({ id: 1, state: 'acknowledged', acknowledgedAt: '2026-12-02T03:12:30.000Z', acknowledgedBy: operator.userId, clearedAt: null });
    expect(audit.entries).toEqual([
      { actor: operator, action: 'alarm.acknowledge', target: 'alarm:1', details: { plantId: 1, rule: 'blanket-high', target: 'fc1', state: 'acknowledged', comment: 'blanket rising after storm, RAS raised' } },
    ]);
    expect(changes.map(([a, c]) => [a.id, c])).toEqual([[1, 'acknowledged']]);
  });

  it('a cleared, unacknowledged alarm can be acknowledged and stays cleared (ISA-18.2: return to normal unacknowledged)', async () => {
    const { clock, svc } = setup();
    clock.advance(60_000);
    const out = await svc.acknowledge(operator, 1, 2);
    expect(out).toMatchObject({ state: 'cleared', acknowledgedAt: '2026-12-02T03:13:30.000Z', clearedAt: '2026-12-02T03:10:00.000Z' });
  });

  it('twice is a conflict naming the first time; an unknown alarm is 404; another plant for a scoped token is 403; none of them audited', async () => {
    const { audit, svc } = setup();
    await svc.acknowledge(operator, 1, 1);
    const again = await svc.acknowledge(operator, 1, 1).catch((e: unknown) => e);
    expect(again).toBeInstanceOf(ConflictError);
    expect((again as Error).message).toContain('2026-12-02T03:12:30.000Z');
    await expect(svc.acknowledge(operator, 1, 99)).rejects.toBeInstanceOf(NotFoundError);
    await expect(svc.acknowledge(scopedToken, 1, 2)).rejects.toBeInstanceOf(ForbiddenError);
    expect(audit.entries).toHaveLength(1);
  });
});
