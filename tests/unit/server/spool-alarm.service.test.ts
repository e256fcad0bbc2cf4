import { describe, expect, it } from 'vitest';
import { bytesText, spoolAlarmConditions, spoolCapTarget, spoolFileTarget, type SpoolWorkerView } from '../../../server/services/alarm.service.ts';

/** Status rows of ingest workers as the engine reads them (latest heartbeat first); sizes are invented. */
const DIR = '/srv/flocstream/.data/spool';
const base = { dir: DIR, files: 3, bytes: 3_000, pendingBytes: 3_000, maxBytes: 10_000, unreadable: [], capReached: false };
const bad = { file: `${DIR}/000000000007.spool`, bytes: 1_000, atByte: 232, error: 'bad checksum in the record at byte 232' };
type SpoolOut = NonNullable<SpoolWorkerView['spool']>;
const row = (over: { host?: string; running?: boolean; spool?: Partial<SpoolOut> } = {}): SpoolWorkerView => ({ host: over.host ?? 'h1', running: over.running ?? true, spool: { ...base, ...over.spool } });
const byTarget = (ws: SpoolWorkerView[], open: string[] = []) => new Map(spoolAlarmConditions(ws, open).map((c) => [c.target, c]));

describe('ingest-spool alarm conditions from the workers’ status rows', () => {
  it('cap reached: active, priority 1, value the bytes to replay and limit the cap, the message naming the folder and both sizes', () => {
    const c = byTarget([row({ spool: { pendingBytes: 10_240, capReached: true } })]).get(spoolCapTarget('h1', DIR))!;
    expect(c).toMatchObject({ rule: 'ingest-spool', active: true, priority: 1, value: 10_240, limit: 10_000 });
    // 10 240 / 1024 = 10.00 KiB; 10 000 / 1024 = 9.77 KiB.
    expect(c.message).toContain(`Ingest spool ${DIR} on h1 holds 10240 bytes (10.00 KiB) to replay and reached its cap of 10000 bytes (9.77 KiB)`);
  });

  it('below the cap: the condition is false (an open alarm clears)', () => {
    expect(byTarget([row()]).get(spoolCapTarget('h1', DIR))).toMatchObject({ active: false, value: 3_000 });
  });

  it('an unreadable file: active, priority 2, naming the file, its size and where reading stopped', () => {
    const c = byTarget([row({ spool: { unreadable: [bad] } })]).get(spoolFileTarget('h1', bad.file))!;
    expect(c).toMatchObject({ active: true, priority: 2, value: 1_000 });
    expect(c.message).toContain(`Spool file ${bad.file} (1000 bytes) on h1 cannot be read from byte 232 (bad checksum`);
    expect(c.message).toContain(`${DIR}/damaged/`);
  });

  it('a file no longer listed while its alarm is open: false (moved away), with the file named', () => {
    const c = byTarget([row()], [spoolFileTarget('h1', bad.file)]).get(spoolFileTarget('h1', bad.file))!;
    expect(c).toMatchObject({ active: false });
    expect(c.message).toBe(`Spool file ${bad.file} is no longer in the spool folder on h1.`);
  });

  it('no running worker on that spool: unknown (neither raises nor clears), the stale row does not count', () => {
    const m = byTarget([row({ running: false, spool: { capReached: true, unreadable: [bad] } })], [spoolFileTarget('h1', `${DIR}/000000000003.spool`)]);
    expect([...m.values()].map((c) => c.active)).toEqual([null, null, null]);
  });

  it('a restarted worker decides, not the stopped one before it; two running workers sharing a folder: either one at the cap counts', () => {
    expect(byTarget([row(), row({ running: false, spool: { capReached: true } })]).get(spoolCapTarget('h1', DIR))?.active).toBe(false);
    expect(byTarget([row(), row({ spool: { capReached: true } })]).get(spoolCapTarget('h1', DIR))?.active).toBe(true);
  });

  it('another host’s spool is its own target; an open alarm of a spool no row mentions is not evaluated (the engine clears it)', () => {
    const m = byTarget([row(), row({ host: 'h2', spool: { capReached: true } })], [spoolCapTarget('h3', DIR)]);
    expect(m.get(spoolCapTarget('h1', DIR))?.active).toBe(false);
    expect(m.get(spoolCapTarget('h2', DIR))?.active).toBe(true);
    expect(m.has(spoolCapTarget('h3', DIR))).toBe(false);
  });

  it('bytesText: binary prefixes (IEC 80000-13)', () => {
    expect(bytesText(512)).toBe('512 bytes');
    expect(bytesText(2 * 1024 ** 3)).toBe('2147483648 bytes (2.00 GiB)');
  });
});
