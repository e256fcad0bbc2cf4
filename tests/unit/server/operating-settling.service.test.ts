import { describe, expect, it } from 'vitest';
import { createOperatingSettlingService } from '../../../server/services/operating-settling.service.ts';
import type { SeriesPoint } from '../../../shared/domain/balance/inputs.ts';
import { fixtureInputs, NOW, SIG } from '../domain/balance-fixture.ts';
import { operatingMinutes } from '../domain/operating-series.ts';

const H = 3_600_000;
const TRUTH = { v0_mh: 6, k_Lg: 0.5 };

/**
 * A balance repository whose rollup_1m holds generated operation of the fixture clarifier (sludge
 * v0 = 6 m/h, k = 0.5 L/g at the limiting flux, Keinath et al. 1977; operating-series.ts) from
 * `from_ms` on, and counts what the service asks of it.
 */
function fakeRepo(from_ms: number, to_ms: number, noise?: { sd: number; seed: number }) {
  const mins = operatingMinutes(TRUTH, from_ms, (to_ms - from_ms) / H, noise);
  const calls: Array<{ tagIds: number[]; from: number; to: number }> = [];
  return {
    calls,
    repo: {
      async series(tagIds: number[], from: Date, to: Date): Promise<Map<number, SeriesPoint[]>> {
        calls.push({ tagIds, from: from.getTime(), to: to.getTime() });
        const inRange = mins.filter((m) => m.t_ms >= from.getTime() && m.t_ms <= to.getTime());
        const pts = (f: (m: (typeof mins)[number]) => number) => inRange.map((m) => ({ t_ms: m.t_ms, mean: f(m), qualityCode: 0 }));
        const all = new Map<number, SeriesPoint[]>([
          [SIG.lv.tagId, pts((m) => m.level_m)],
          [SIG.xr.tagId, pts((m) => m.underflowTss_gL)],
          [SIG.qr.tagId, pts((m) => m.rasFlow_m3h)],
          [SIG.qw.tagId, pts((m) => m.wasFlow_m3h)],
        ]);
        return new Map([...all].filter(([id]) => tagIds.includes(id)));
      },
    },
  };
}

describe('operating settling service: reads each hour once, the window back one chunk per balance, fits only on change', () => {
  const clock = Math.floor(NOW / H) * H + 20 * 60_000; // 20 min into the hour
  const end = Math.floor(NOW / H) * H;
  /** The fixture's signals with their latest samples at `t` (the plant clock). */
  const at = (t: number) => {
    const i = fixtureInputs();
    return { ...i, readings: i.readings.map((r) => ({ ...r, ts_ms: t })) };
  };
  const inp = at(clock);

  it('a 5-day window with 48 h chunks is covered in three calls, then no query until a new hour; the fit recovers v0 and k and says how far back it read', async () => {
    const { repo, calls } = fakeRepo(end - 6 * 24 * H, end + 2 * H);
    const svc = createOperatingSettlingService({ balanceRepo: repo, chunk_h: 48 });
    const first = await svc.fit(inp, clock, 5);
    // only the fit's tags: blanket level, underflow TSS, the two pump flows (not influent, MLSS, effluent TSS)
    expect(calls[0]!.tagIds.sort()).toEqual([SIG.lv.tagId, SIG.xr.tagId, SIG.qr.tagId, SIG.qw.tagId].sort());
    expect(calls.map((c) => [c.from, c.to])).toEqual([[end - 48 * H, end - 1]]);
    expect(first.n).toBe(48);
    expect(first.fit.reasons.join(' ')).toMatch(/history read back to .* of the 5-day window so far/);
    await svc.fit(inp, clock, 5);
    const third = await svc.fit(inp, clock, 5);
    expect(calls.map((c) => [c.from, c.to])).toEqual([
      [end - 48 * H, end - 1],
      [end - 96 * H, end - 48 * H - 1],
      [end - 120 * H, end - 96 * H - 1],
    ]);
    expect(third.n).toBe(120);
    expect(third.fit.reasons.join(' ')).not.toMatch(/history read back/);
    expect(third.fit.value!.v0_mh).toBeCloseTo(6, 5);
    expect(third.fit.value!.k_Lg).toBeCloseTo(0.5, 6);
    expect([third.from_ms, third.to_ms]).toEqual([end - 119 * H, end]);
    // Same hour: no query, the same fit.
    expect(await svc.fit(at(clock + 30 * 60_000), clock + 30 * 60_000, 5)).toBe(third);
    expect(calls).toHaveLength(3);
    // The next hour: one query for that hour only; the oldest hour leaves the window.
    const next = await svc.fit(at(clock + H), clock + H, 5);
    expect(calls.slice(3).map((c) => [c.from, c.to])).toEqual([[end, end + H - 1]]);
    expect(next.n).toBe(120);
    expect([next.from_ms, next.to_ms]).toEqual([end - 118 * H, end + H]);
  });

  it('seed 16, 3 % log-normal noise on the underflow TSS over 5 days (120 hours): v0 and k within two of their stated standard errors, and these not vacuous', async () => {
    const { repo } = fakeRepo(end - 6 * 24 * H, end, { sd: 0.03, seed: 16 });
    const svc = createOperatingSettlingService({ balanceRepo: repo, chunk_h: 5 * 24 });
    const f = (await svc.fit(inp, clock, 5)).fit.value!;
    expect(Math.abs(f.k_Lg - TRUTH.k_Lg)).toBeLessThanOrEqual(2 * f.kStdErr_Lg!);
    expect(Math.abs(Math.log(f.v0_mh / TRUTH.v0_mh))).toBeLessThanOrEqual(2 * f.lnV0StdErr!);
    expect(f.kStdErr_Lg!).toBeGreaterThan(0);
    expect(f.kStdErr_Lg!).toBeLessThan(0.05);
    expect(f.lnV0StdErr!).toBeLessThan(0.3);
  });

  it('an hour is read only once every fit tag has passed it; a tag more than 2 h behind is not waited for', async () => {
    const { repo, calls } = fakeRepo(end - 48 * H, end + 2 * H);
    const svc = createOperatingSettlingService({ balanceRepo: repo, chunk_h: 48 });
    await svc.fit(inp, clock, 1);
    // the underflow TSS (polled, say) is still 30 min behind: the hour [end, end + 1 h) waits for it
    const lagging = { ...at(clock + H), readings: at(clock + H).readings.map((r) => (r.tagId === SIG.xr.tagId ? { ...r, ts_ms: clock + H - 30 * 60_000 } : r)) };
    await svc.fit(lagging, clock + H, 1);
    expect(calls.slice(1).some((c) => c.to >= end)).toBe(false);
    await svc.fit(at(clock + H), clock + H, 1);
    expect(calls.at(-1)).toMatchObject({ from: end, to: end + H - 1 });
    // a tag 3 h behind (dead) holds nothing up
    const dead = { ...at(clock + 2 * H), readings: at(clock + 2 * H).readings.map((r) => (r.tagId === SIG.xr.tagId ? { ...r, ts_ms: clock - H } : r)) };
    await svc.fit(dead, clock + 2 * H, 1);
    expect(calls.at(-1)).toMatchObject({ from: end + H, to: end + 2 * H - 1 });
  });

  it('a changed tag mapping or a plant clock that went back starts afresh', async () => {
    const { repo, calls } = fakeRepo(end - 48 * H, end + H);
    const svc = createOperatingSettlingService({ balanceRepo: repo, chunk_h: 48 });
    await svc.fit(inp, clock, 1);
    expect(calls).toHaveLength(1);
    const remapped = { ...inp, readings: inp.readings.map((r) => (r.tagId === SIG.xr.tagId ? { ...r, unit: 'mg/L' } : r)) };
    await svc.fit(remapped, clock, 1);
    expect(calls).toHaveLength(2);
    await svc.fit(remapped, clock - 3 * H, 1);
    expect(calls.at(-1)).toMatchObject({ from: end - 3 * H - 24 * H, to: end - 3 * H - 1 });
  });
});
