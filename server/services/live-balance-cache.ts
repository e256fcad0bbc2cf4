import type { BalanceOut } from '../../shared/contracts/plant-api.ts';
import type { AppContext } from '../app-context.ts';
import { plantRepository } from '../repositories/plant.repository.ts';
import { balanceOut } from './plant.service.ts';
import { STREAM_CHANNEL, streamNotification } from './stream.service.ts';

/**
 * The latest balance of each plant in memory, as JSON text serialised once per balance, for
 * `GET /plants/:plantId/balance/live` — the monitor's most frequent read.
 *
 * Kept current by the balance engine's announcement (`pg_notify('flocstream_stream', {event:
 * 'balance'})`, see stream.service.ts): on it the plant's copy is dropped and read again from the
 * database once. Served only while this process LISTENs (`PgListener`): while that connection is
 * down, and before it is up, every request reads the database as before. A read that started
 * before an announcement does not store its (older) answer. A plant with no balance yet is not
 * kept (its answer carries a reason and is read each time), and neither is an answer older than
 * `maxAge_ms`: a balance written without an announcement (by hand, by a tool) shows up after
 * at most that long.
 */
export interface LiveBalanceCacheOptions {
  maxAge_ms: number;
  now: () => number;
}
export const DEFAULT_LIVE_BALANCE_CACHE: LiveBalanceCacheOptions = { maxAge_ms: 30_000, now: () => Date.now() };

interface Entry {
  /** `JSON.stringify(balance)`. */
  json: string;
  ts_ms: number;
  id: number;
  storedAt: number;
}

export class LiveBalanceCache {
  private readonly entries = new Map<number, Entry>();
  private readonly generations = new Map<number, number>();
  private readonly waiters = new Set<{ plantId: number; id: number; resolve: () => void }>();
  enabled = false;
  readonly opts: LiveBalanceCacheOptions;

  constructor(
    private readonly load: (plantId: number) => Promise<BalanceOut | null>,
    opts: Partial<LiveBalanceCacheOptions> = {},
  ) {
    this.opts = { ...DEFAULT_LIVE_BALANCE_CACHE, ...opts };
  }

  private gen(plantId: number): number {
    return this.generations.get(plantId) ?? 0;
  }

  /** The whole answer as JSON text, or undefined when this plant's balance is not in memory. */
  answer(plantId: number): string | undefined {
    if (!this.enabled) return undefined;
    const e = this.entries.get(plantId);
    if (!e) return undefined;
    const now = this.opts.now();
    if (now - e.storedAt > this.opts.maxAge_ms) {
      this.entries.delete(plantId);
      return undefined;
    }
    // Same text as JSON.stringify({ plantId, balance, age_s }) of the database path.
    return `{"plantId":${plantId},"balance":${e.json},"age_s":${JSON.stringify((now - e.ts_ms) / 1000)}}`;
  }

  /** Keeps a balance just read from the database, unless the plant's copy was dropped since `generation`. */
  store(plantId: number, balance: BalanceOut, generation: number): void {
    if (!this.enabled || generation !== this.gen(plantId)) return;
    this.entries.set(plantId, { json: JSON.stringify(balance), ts_ms: Date.parse(balance.ts), id: balance.id, storedAt: this.opts.now() });
    for (const w of this.waiters) {
      if (w.plantId === plantId && balance.id >= w.id) {
        this.waiters.delete(w);
        w.resolve();
      }
    }
  }

  generation(plantId: number): number {
    return this.gen(plantId);
  }

  /** A new balance was announced: drop the copy and read the new one once. */
  async refresh(plantId: number): Promise<void> {
    this.generations.set(plantId, this.gen(plantId) + 1);
    this.entries.delete(plantId);
    if (!this.enabled) return;
    const g = this.gen(plantId);
    const b = await this.load(plantId);
    if (b) this.store(plantId, b, g);
  }

  setEnabled(on: boolean): void {
    for (const k of this.entries.keys()) this.generations.set(k, this.gen(k) + 1);
    this.entries.clear();
    this.enabled = on;
  }

  /** Resolves once balance `id` (or a newer one) of the plant is in memory (tests). */
  holds(plantId: number, id: number): Promise<void> {
    const e = this.entries.get(plantId);
    if (e && e.id >= id) return Promise.resolve();
    return new Promise((resolve) => this.waiters.add({ plantId, id, resolve }));
  }
}

const caches = new WeakMap<AppContext, LiveBalanceCache>();

/** The live-balance cache of this application context, refreshed by the balance announcements. */
export function liveBalanceCache(ctx: AppContext): LiveBalanceCache {
  const c = caches.get(ctx);
  if (c) return c;
  const repo = plantRepository(ctx.db.db, ctx.db.pool);
  const cache = new LiveBalanceCache(async (plantId) => {
    const b = await repo.latestBalance(plantId);
    return b ? balanceOut(b) : null;
  });
  caches.set(ctx, cache);
  const listener = ctx.db.listener(ctx.log);
  listener.onState((up) => cache.setEnabled(up));
  listener.on(STREAM_CHANNEL, (payload) => {
    let n;
    try {
      n = streamNotification.safeParse(JSON.parse(payload));
    } catch {
      return; // stream.service.ts logs unreadable payloads for its subscribers
    }
    if (n.success && n.data.event === 'balance') {
      cache.refresh(n.data.plantId).catch((err) => ctx.log.warn({ err, plantId: n.data.plantId }, 'live balance refresh failed; next request reads the database'));
    }
  });
  cache.setEnabled(listener.up);
  return cache;
}
