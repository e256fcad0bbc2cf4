import { describe, expect, it } from 'vitest';
import { alarmConditions, limitState, stepAlarms, type AlarmCondition } from '../../../server/services/alarm.service.ts';
import { computeBalance } from '../../../shared/domain/balance/assemble.ts';
import { fixtureInputs, NOW, settings } from '../domain/balance-fixture.ts';

const cond = (active: boolean | null): AlarmCondition => ({ rule: 'mlss-low', target: 'ab1', priority: 2, active, value: 1, limit: 2, message: 'm' });

describe('ISA-18.2 deadband and on-delay', () => {
  it('low alarm: raised below the limit, returns to normal only beyond limit + deadband', () => {
    expect(limitState(1.95, 2, 0.1, 'low', false)).toBe(true);
    expect(limitState(2.05, 2, 0.1, 'low', false)).toBe(false);
    expect(limitState(2.05, 2, 0.1, 'low', true)).toBe(true); // inside the deadband: stays active
    expect(limitState(2.1, 2, 0.1, 'low', true)).toBe(false);
    expect(limitState(null, 2, 0.1, 'low', true)).toBeNull();
  });
  it('high alarm mirrors it', () => {
    expect(limitState(0.31, 0.3, 0.02, 'high', false)).toBe(true);
    expect(limitState(0.29, 0.3, 0.02, 'high', true)).toBe(true);
    expect(limitState(0.27, 0.3, 0.02, 'high', true)).toBe(false);
  });
  it('on-delay: raised only after the condition held continuously for the delay; a gap restarts it', () => {
    const pending = new Map<string, number>();
    const open = new Map<string, { id: number }>();
    expect(stepAlarms([cond(true)], open, pending, 0, 60)).toEqual([]);
    expect(stepAlarms([cond(true)], open, pending, 30_000, 60)).toEqual([]);
    expect(stepAlarms([cond(null)], open, pending, 40_000, 60)).toEqual([]); // unknown breaks continuity
    expect(stepAlarms([cond(true)], open, pending, 50_000, 60)).toEqual([]);
    expect(stepAlarms([cond(true)], open, pending, 100_000, 60)).toEqual([]);
    const raised = stepAlarms([cond(true)], open, pending, 110_000, 60);
    expect(raised.map((a) => a.kind)).toEqual(['raise']);
  });
  it('clears an open alarm when the condition is false, never when it is unknown', () => {
    const open = new Map([['mlss-low|ab1', { id: 7 }]]);
    expect(stepAlarms([cond(null)], open, new Map(), 0, 60)).toEqual([]);
    expect(stepAlarms([cond(false)], open, new Map(), 0, 60)).toMatchObject([{ kind: 'clear', alarmId: 7 }]);
  });
});

describe('alarm conditions from a balance', () => {
  const none = () => false;
  it('fixture plant: stored fraction 0.4 > 0.3 and SRT 25 % off target are its alarms; the message carries the caution', () => {
    const b = computeBalance(fixtureInputs(), settings());
    const active = alarmConditions(b, settings(), none).filter((c) => c.active);
    expect(active.map((c) => `${c.rule}:${c.target}`)).toEqual(['stored-fraction-high:plant', 'srt-off-target:plant']);
    expect(active[0]!.message).toMatch(/40 % of the sludge inventory.*licensed operator decides/);
    // SRT 7.45 d against 10 d: 25.5 % off, beyond the 20 % tolerance.
    expect(active[1]!.value).toBeCloseTo(0.255066, 5);
  });
  it('low MLSS, high blanket, small RAS margin', () => {
    const b = computeBalance(fixtureInputs({ override: { x: { value: 1.5 }, lv: { value: 2.5 } } }), settings());
    const rules = alarmConditions(b, settings(), none).filter((c) => c.active).map((c) => c.rule);
    expect(rules).toEqual(expect.arrayContaining(['mlss-low', 'blanket-high']));
    const tight = computeBalance(fixtureInputs({ svi: 160 }), settings()); // X_R,max 7.5: margin 1 − 7/7.5 = 0.067
    expect(alarmConditions(tight, settings(), none).find((c) => c.rule === 'ras-concentration-margin-low')).toMatchObject({ active: true });
  });
  it('ingest down suppresses the per-tag stale alarms (designed suppression)', () => {
    const inp = fixtureInputs();
    const old = NOW - 500_000;
    inp.readings = inp.readings.map((r) => ({ ...r, receivedAt_ms: old }));
    inp.lastReceived_ms = old;
    const c = alarmConditions(computeBalance(inp, settings()), settings(), none);
    expect(c.find((x) => x.rule === 'ingest-down')).toMatchObject({ active: true, priority: 1 });
    expect(c.filter((x) => x.rule === 'tag-stale').every((x) => x.active === null)).toBe(true);
  });
  it('one stale tag with ingest alive: a tag-stale alarm for it alone', () => {
    const c = alarmConditions(computeBalance(fixtureInputs({ override: { lv: { receivedAt_ms: NOW - 400_000 } } }), settings()), settings(), none);
    expect(c.filter((x) => x.rule === 'tag-stale' && x.active).map((x) => x.target)).toEqual(['LIT-211']);
  });
});
