/**
 * Alarms from the live balance. Conditions are evaluated purely from a Balance (figures and
 * input ages) and the settings; raising and clearing follow ISA-18.2 (ANSI/ISA-18.2-2016):
 * - on-delay: a condition must hold for `alarm.on_delay_s` before the alarm is raised, against
 *   chatter from noise around a limit;
 * - deadband: once raised, an analogue alarm returns to normal only when the value is back
 *   beyond the limit by the rule's deadband;
 * - states raised → acknowledged → cleared, with who and when (alarm.repository.ts);
 * - designed suppression: while ingest is down, no new tag-stale alarm is raised for each tag
 *   (they would only repeat the one ingest-down alarm); and after ingest's worker started or a
 *   source connected, a tag-stale alarm is stored *suppressed* (listed with its reason, not
 *   annunciated) for `alarm.start_suppression_periods` expected periods of the tag (at least
 *   `alarm.start_suppression_min_s`) while the source catches up, and annunciated only if the
 *   tag is still stale after that — against the alarm flood at a start (ISA-18.2 defines a
 *   flood, e.g. more than 10 alarms in 10 minutes for one operator [M]);
 * - shelving: an operator shelves an alarm for a time with a reason (audited); it is not
 *   annunciated (no mail) until the shelf expires, judged on the engine's clock, and is then
 *   annunciated again if still active.
 * A condition whose figure is unavailable is *unknown*: it neither raises nor clears (the
 * tag-stale / tag-bad alarms report the missing input), and it restarts the on-delay.
 * Process alarms carry the operator caution: the figures are advisory, the licensed operator decides.
 */
import { ALARM_PRIORITY, ALARM_SUMMARY_BUCKET_MIN, type AlarmOut, type AlarmRule, type AlarmSummaryOut } from '../../shared/contracts/alarm.ts';
import { OPERATOR_CAUTION, type Balance, type FigureOut } from '../../shared/contracts/balance.ts';
import type { EffectiveSettings } from '../../shared/contracts/settings.ts';
import type { SpoolStatusOut } from '../../shared/contracts/wiring.ts';
import type { Clock } from '../app-context.ts';
import { ConflictError, NotFoundError } from '../http/errors.ts';
import type { AlarmRepository, AlarmRow } from '../repositories/alarm.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';
import { assertPlantScope } from './plant.service.ts';

export interface AlarmCondition {
  rule: AlarmRule;
  target: string;
  priority: number;
  /** true: in alarm; false: normal; null: unknown (figure unavailable, or suppressed). */
  active: boolean | null;
  value: number | null;
  limit: number | null;
  message: string;
  /** Designed suppression (why), or null: annunciated when raised. */
  suppressed?: string | null;
}

const key = (rule: string, target: string) => `${rule}|${target}`;
const f3 = (v: number) => (Math.abs(v) >= 100 ? v.toFixed(0) : v.toPrecision(3));

/**
 * ISA-18.2 deadband for a limit alarm: a high alarm is raised above `limit` and returns to
 * normal only at or below `limit − deadband` (mirrored for a low alarm). `wasActive` is whether
 * the alarm is active now; null value → unknown.
 */
export function limitState(value: number | null, limit: number, deadband: number, dir: 'high' | 'low', wasActive: boolean): boolean | null {
  if (value === null || !Number.isFinite(value)) return null;
  if (dir === 'high') return wasActive ? value > limit - deadband : value > limit;
  return wasActive ? value < limit + deadband : value < limit;
}

/** Every alarm condition of a balance (pure). `isActive(rule, target)` says which alarms are active now (for the deadband). */
export function alarmConditions(b: Balance, s: EffectiveSettings, isActive: (rule: AlarmRule, target: string) => boolean): AlarmCondition[] {
  const out: AlarmCondition[] = [];
  const caution = ` ${OPERATOR_CAUTION}`;
  const add = (rule: AlarmRule, target: string, active: boolean | null, value: number | null, limit: number | null, message: string) =>
    out.push({ rule, target, priority: ALARM_PRIORITY[rule], active, value, limit, message });
  const analog = (rule: AlarmRule, target: string, fig: FigureOut, limit: number, deadband: number, dir: 'high' | 'low', text: (v: number) => string) => {
    const active = limitState(fig.quality === 'unavailable' ? null : fig.value, limit, deadband, dir, isActive(rule, target));
    const est = fig.quality === 'estimated' ? ` (estimated: ${fig.reasons.join('; ')})` : '';
    add(rule, target, active, fig.value, limit, fig.value === null ? '' : text(fig.value) + est + '.' + caution);
  };

  // Ingest down: nothing received from any source of the plant for too long.
  const ingestLimit = s['alarm.ingest_down_s'];
  const hasTags = b.inputs.signals.length > 0;
  const age = b.inputs.ingestAge_s;
  const ingestDown = hasTags ? age === null || age > ingestLimit : null;
  add(
    'ingest-down',
    'plant',
    ingestDown,
    age,
    ingestLimit,
    age === null ? 'No value has ever been received for this plant: check the ingest process and its sources.' : `No tag of this plant received for ${Math.round(age)} s (limit ${ingestLimit} s): check the ingest process and its sources; all live figures are stale.`,
  );

  for (const i of b.inputs.signals) {
    const staleLike = i.stale || i.ts === null;
    add('tag-stale', i.tag, ingestDown ? null : staleLike && !i.bad, i.age_s, null, i.ts === null ? `${i.tag} (${i.signal} of ${i.target}): no value received yet.` : `${i.tag} (${i.signal} of ${i.target}) is stale: ${i.reasons.join('; ')}.`);
    add('tag-bad', i.tag, i.bad, i.value, null, `${i.tag} (${i.signal} of ${i.target}) is bad: ${i.reasons.join('; ')}.`);
  }

  const d = b.data;
  for (const basin of d.basins) {
    analog('mlss-low', basin.code, basin.mlss_gL, s['alarm.mlss_floor_gL'], s['alarm.mlss_deadband_gL'], 'low', (v) => `MLSS in ${basin.code} is ${f3(v)} g/L, below the floor of ${s['alarm.mlss_floor_gL']} g/L`);
  }
  analog('stored-fraction-high', 'plant', d.inventory.storedFraction, s['alarm.stored_fraction_max'], s['alarm.stored_fraction_deadband'], 'high', (v) =>
    `${(v * 100).toFixed(0)} % of the sludge inventory is in the clarifiers (limit ${(s['alarm.stored_fraction_max'] * 100).toFixed(0)} %)`,
  );
  for (const c of d.clarifiers) {
    const lim = s['alarm.blanket_max_fraction_swd'] * c.sideWaterDepth_m;
    analog('blanket-high', c.code, c.blanketLevel_m, lim, s['alarm.blanket_deadband_m'], 'high', (v) => `Sludge blanket in ${c.code} at ${f3(v)} m above the floor (limit ${f3(lim)} m)`);
    analog('blanket-rising', c.code, c.blanketRate_m_h, s['alarm.blanket_rate_max_m_h'], s['alarm.blanket_rate_deadband_m_h'], 'high', (v) =>
      `Sludge blanket in ${c.code} rising at ${f3(v)} m/h over the last ${s['alarm.blanket_rate_window_min']} min (limit ${s['alarm.blanket_rate_max_m_h']} m/h)`,
    );
  }
  for (const t of d.trains) {
    const lim = s['alarm.ras_margin_min'];
    analog('ras-concentration-margin-low', t.code, t.ras.concentrationMargin, lim, s['alarm.ras_margin_deadband'], 'low', (v) =>
      `RAS concentration margin of ${t.code} is ${(v * 100).toFixed(0)} % (threshold ${(lim * 100).toFixed(0)} %): the underflow needed ${t.ras.requiredRasConc_gL.value?.toFixed(2) ?? '?'} g/L against a limit of ${t.ras.rasConcMax_gL.value?.toFixed(2) ?? '?'} g/L from the latest SVI`,
    );
    analog('ras-pump-margin-low', t.code, t.ras.pumpMargin, lim, s['alarm.ras_margin_deadband'], 'low', (v) =>
      `RAS pump margin of ${t.code} is ${(v * 100).toFixed(0)} % (threshold ${(lim * 100).toFixed(0)} %): minimum return flow ${t.ras.minRasFlow_m3h.value?.toFixed(0) ?? '?'} m3/h against ${t.rasPumpCapacity_m3h} m3/h installed`,
    );
  }
  // SRT off target: |SRT − target| against tolerance × target, deadband a fraction of the target.
  const target = d.srt.target_d;
  const srtFig = d.srt.total_d;
  const dev: FigureOut = { ...srtFig, value: srtFig.value === null ? null : Math.abs(srtFig.value - target) / target };
  const tol = s['alarm.srt_tolerance'];
  analog('srt-off-target', 'plant', dev, tol, s['alarm.srt_deadband'], 'high', () =>
    `Rolling SRT ${srtFig.value!.toFixed(1)} d is off the ${target} d target by more than ${(tol * 100).toFixed(0)} %; WAS flow for the target: ${d.srt.wasAdvice_m3h.value === null ? 'unavailable' : `${d.srt.wasAdvice_m3h.value.toFixed(1)} m3/h`}`,
  );
  return out;
}

/**
 * Designed suppression of tag-stale alarms after a start (pure): a stale tag whose latest start
 * (worker start or source connection, `starts` by tag name, epoch ms) is younger than
 * max(periods × expected period, min_s) gets the reason; other conditions are left as they are.
 */
export function suppressAfterStart(conds: AlarmCondition[], b: Balance, s: EffectiveSettings, starts: Map<string, number>, now_ms: number): AlarmCondition[] {
  const period = new Map(b.inputs.signals.map((i) => [i.tag, i.expectedPeriod_s]));
  return conds.map((c) => {
    if (c.rule !== 'tag-stale' || c.active !== true) return c;
    const start = starts.get(c.target);
    if (start === undefined) return c;
    const window_s = Math.max(s['alarm.start_suppression_periods'] * (period.get(c.target) ?? 0), s['alarm.start_suppression_min_s']);
    const since_s = (now_ms - start) / 1000;
    if (since_s >= window_s) return c;
    return { ...c, suppressed: `source catching up after a start ${Math.round(since_s)} s ago: suppressed by design for ${Math.round(window_s)} s (ISA-18.2 designed suppression)` };
  });
}

/** One ingest worker's spool as the alarm engine sees it (from its `ingest_workers` row). */
export interface SpoolWorkerView {
  host: string;
  /** Heartbeat fresh and not stopped (ingest-status.service.ts workerRunning). */
  running: boolean;
  /** null: the row's status could not be read. */
  spool: SpoolStatusOut | null;
}

/** Bytes as people read them: `2147483648 bytes (2.00 GiB)`. */
export function bytesText(n: number): string {
  const units = ['KiB', 'MiB', 'GiB', 'TiB'];
  let v = n;
  let u = -1;
  while (v >= 1024 && u < units.length - 1) {
    v /= 1024;
    u++;
  }
  return u < 0 ? `${n} bytes` : `${n} bytes (${v.toFixed(2)} ${units[u]})`;
}

export const spoolCapTarget = (host: string, dir: string) => `spool:${host}:${dir}`;
export const spoolFileTarget = (host: string, file: string) => `spool-file:${host}:${file}`;

/**
 * The `ingest-spool` alarm conditions (pure) from the ingest workers' status rows (latest
 * heartbeat first) and the targets of this plant's open `ingest-spool` alarms. Ingest only
 * reports its spool (ingest/sink/spool.ts); the alarms are the API's, as every other alarm.
 * - cap (`spool:<host>:<dir>`, priority 1): the files still to replay reached the spool's size
 *   cap, so ingest holds new values unacknowledged (backpressure; the broker keeps them) — the
 *   monitor is going blind. Clears once the backlog is below the cap.
 * - unreadable file (`spool-file:<host>:<file>`, priority 2): acknowledged samples sit in a file
 *   ingest cannot read. Clears once the file has left the spool folder (an operator moved it
 *   away for inspection or repair: README, Cautions), which ingest notices within a second.
 * A spool whose workers have all stopped or gone silent is unknown (neither raises nor clears:
 * the `ingest-down` alarms say why); one no row mentions any more (rows are kept a day) is no
 * longer evaluated and its alarms clear. The spool serves every plant, so every plant gets them,
 * as the supervisor's process alarms.
 */
export function spoolAlarmConditions(workers: readonly SpoolWorkerView[], openTargets: readonly string[]): AlarmCondition[] {
  const groups = new Map<string, { host: string; dir: string; rows: { running: boolean; spool: SpoolStatusOut }[] }>();
  for (const w of workers) {
    if (!w.spool?.dir) continue;
    const k = spoolCapTarget(w.host, w.spool.dir);
    let g = groups.get(k);
    if (!g) groups.set(k, (g = { host: w.host, dir: w.spool.dir, rows: [] }));
    g.rows.push({ running: w.running, spool: w.spool });
  }
  const out: AlarmCondition[] = [];
  const prio = ALARM_PRIORITY['ingest-spool'];
  for (const [capTarget, g] of groups) {
    const live = g.rows.filter((r) => r.running);
    // Unknown when no worker of this spool runs: its last status may be hours old.
    const known = live.length > 0;
    const shown = known ? live : [g.rows[0]!];
    const full = shown.find((r) => r.spool.capReached)?.spool ?? null;
    const st = full ?? shown[0]!.spool;
    const pending = st.pendingBytes ?? st.bytes;
    const cap = st.maxBytes ?? null;
    out.push({
      rule: 'ingest-spool',
      target: capTarget,
      priority: prio,
      active: known ? full !== null : null,
      value: pending,
      limit: cap,
      message: full
        ? `Ingest spool ${g.dir} on ${g.host} holds ${bytesText(pending)} to replay and reached its cap${cap === null ? '' : ` of ${bytesText(cap)}`}: ingest holds new values unacknowledged (the broker keeps them) until PostgreSQL takes the backlog. Check the database and its disk.`
        : `Ingest spool ${g.dir} on ${g.host} holds ${bytesText(pending)} to replay, below its cap${cap === null ? '' : ` of ${bytesText(cap)}`}.`,
    });
    const listed = new Map(shown.flatMap((r) => r.spool.unreadable).map((u) => [spoolFileTarget(g.host, u.file), u]));
    for (const [target, u] of listed) {
      out.push({
        rule: 'ingest-spool',
        target,
        priority: 2,
        active: known ? true : null,
        value: u.bytes,
        limit: null,
        message: `Spool file ${u.file} (${bytesText(u.bytes)}) on ${g.host} cannot be read from byte ${u.atByte} (${u.error}): the acknowledged samples after that byte are not in the database. Move the file out of the spool folder (e.g. into ${g.dir}/damaged/) to keep it for inspection or repair; the alarm clears once it is gone.`,
      });
    }
    const hostPrefix = spoolFileTarget(g.host, '');
    for (const target of openTargets) {
      if (!target.startsWith(spoolFileTarget(g.host, `${g.dir}/`)) || listed.has(target)) continue;
      const file = target.slice(hostPrefix.length);
      out.push({ rule: 'ingest-spool', target, priority: 2, active: known ? false : null, value: null, limit: null, message: `Spool file ${file} is no longer in the spool folder on ${g.host}.` });
    }
  }
  return out;
}

export type AlarmAction =
  | { kind: 'raise'; condition: AlarmCondition }
  | { kind: 'annunciate'; alarmId: number; condition: AlarmCondition }
  | { kind: 'clear'; alarmId: number; condition: AlarmCondition };

/**
 * One evaluation step (pure): from the conditions, the open alarms and the on-delay timers,
 * which alarms to raise and which to clear. `pending` (key → since epoch ms) is updated in
 * place: a condition that turns true starts its timer, one that is false or unknown drops it.
 */
export function stepAlarms(conds: AlarmCondition[], open: Map<string, { id: number; suppressedReason?: string | null }>, pending: Map<string, number>, now_ms: number, onDelay_s: number): AlarmAction[] {
  const actions: AlarmAction[] = [];
  const seen = new Set<string>();
  for (const c of conds) {
    const k = key(c.rule, c.target);
    seen.add(k);
    const openAlarm = open.get(k);
    if (c.active === true) {
      if (openAlarm) {
        // A suppressed alarm whose suppression ended and whose condition still holds is annunciated now.
        if (openAlarm.suppressedReason && !c.suppressed) actions.push({ kind: 'annunciate', alarmId: openAlarm.id, condition: c });
        continue;
      }
      const since = pending.get(k) ?? now_ms;
      pending.set(k, since);
      if (now_ms - since >= onDelay_s * 1000) {
        actions.push({ kind: 'raise', condition: c });
        pending.delete(k);
      }
    } else {
      pending.delete(k);
      if (c.active === false && openAlarm) actions.push({ kind: 'clear', alarmId: openAlarm.id, condition: c });
    }
  }
  // Alarms whose target left the layout (a tag unmapped) return to normal.
  for (const [k, a] of open) if (!seen.has(k)) actions.push({ kind: 'clear', alarmId: a.id, condition: { rule: k.split('|')[0] as AlarmRule, target: k.slice(k.indexOf('|') + 1), priority: 4, active: false, value: null, limit: null, message: 'no longer evaluated' } });
  for (const k of [...pending.keys()]) if (!seen.has(k)) pending.delete(k);
  return actions;
}

export function toAlarmOut(r: AlarmRow): AlarmOut {
  return {
    id: r.id,
    plantId: r.plantId,
    rule: r.rule,
    target: r.target,
    priority: r.priority,
    state: r.state,
    message: r.message,
    value: r.value,
    limit: r.limit,
    raisedAt: r.raisedAt.toISOString(),
    acknowledgedAt: r.acknowledgedAt?.toISOString() ?? null,
    acknowledgedBy: r.acknowledgedBy,
    clearedAt: r.clearedAt?.toISOString() ?? null,
    suppressedReason: r.suppressedReason,
    shelvedUntil: r.shelvedUntil?.toISOString() ?? null,
    shelvedBy: r.shelvedBy,
    shelveReason: r.shelveReason,
  };
}

/** Whether an alarm is told to the operator now (ISA-18.2: neither suppressed nor shelved). */
export function annunciated(a: AlarmOut, now_ms: number): boolean {
  return a.suppressedReason === null && (a.shelvedUntil === null || Date.parse(a.shelvedUntil) <= now_ms);
}

/** An alarm change; 'raised' and 'unshelved' are annunciations (mailed), 'suppressed' and 'shelved' are listed only. */
export type AlarmChange = 'raised' | 'acknowledged' | 'cleared' | 'suppressed' | 'shelved' | 'unshelved';

export interface AlarmServiceDeps {
  alarmRepo: Pick<AlarmRepository, 'open' | 'raise' | 'clear' | 'get' | 'acknowledge' | 'annunciate' | 'shelve' | 'byId' | 'tagStarts' | 'raisedPerBucket'>;
  audit: AuditLog;
  clock: Clock;
  /** Called for every change after it is stored (stream notice; mail on 'raised' and 'unshelved'). */
  changed?: (a: AlarmOut, change: AlarmChange) => Promise<void> | void;
  /** The ingest workers' spools (latest heartbeat first), for the `ingest-spool` alarms; absent: not evaluated. */
  spoolWorkers?: () => Promise<SpoolWorkerView[]>;
}

/** Evaluates and stores alarms for balances; acknowledges on request. Holds the on-delay timers of this process. */
export function createAlarmService({ alarmRepo: repo, audit, clock, changed, spoolWorkers }: AlarmServiceDeps) {
  const pending = new Map<number, Map<string, number>>();
  return {
    /** Applies one balance: raises and clears alarms; returns the changes. */
    async evaluate(b: Balance, s: EffectiveSettings, now_ms: number): Promise<{ raised: AlarmOut[]; cleared: AlarmOut[] }> {
      const openRows = await repo.open(b.plantId);
      const open = new Map(openRows.map((r) => [key(r.rule, r.target), r]));
      const starts = await repo.tagStarts(b.plantId);
      const conds = suppressAfterStart(
        alarmConditions(b, s, (rule, target) => open.has(key(rule, target))),
        b,
        s,
        starts,
        now_ms,
      );
      if (spoolWorkers) conds.push(...(await spoolConditions(spoolWorkers, openRows)));
      let p = pending.get(b.plantId);
      if (!p) pending.set(b.plantId, (p = new Map()));
      const actions = stepAlarms(conds, open, p, now_ms, s['alarm.on_delay_s']);
      const raised: AlarmOut[] = [];
      const cleared: AlarmOut[] = [];
      const notices: Array<[AlarmOut, AlarmChange]> = [];
      const at = new Date(now_ms);
      for (const a of actions) {
        if (a.kind === 'raise') {
          const c = a.condition;
          const row = await repo.raise({ plantId: b.plantId, rule: c.rule, target: c.target, priority: c.priority, message: c.message, value: c.value, limit: c.limit, raisedAt: at, suppressedReason: c.suppressed ?? null });
          if (!row) continue; // another process raised it first (unique open alarm per rule and target)
          const out = toAlarmOut(row);
          raised.push(out);
          notices.push([out, out.suppressedReason ? 'suppressed' : annunciated(out, now_ms) ? 'raised' : 'shelved']);
        } else if (a.kind === 'annunciate') {
          const row = await repo.annunciate(a.alarmId, at);
          if (!row) continue;
          const out = toAlarmOut(row);
          raised.push(out);
          notices.push([out, annunciated(out, now_ms) ? 'raised' : 'shelved']);
        } else {
          const row = await repo.clear(a.alarmId, at);
          if (row) {
            cleared.push(toAlarmOut(row));
            notices.push([toAlarmOut(row), 'cleared']);
          }
        }
      }
      // Shelves expired on the engine's clock: the alarm is annunciated again if still active.
      for (const r of openRows) {
        if (!r.shelvedUntil || r.shelvedUntil.getTime() > now_ms) continue;
        if (cleared.some((c) => c.id === r.id)) continue;
        const row = await repo.shelve(r.id, null, null, null);
        if (row && row.state !== 'cleared') notices.push([toAlarmOut(row), row.suppressedReason ? 'suppressed' : 'unshelved']);
      }
      for (const [a, change] of notices) await changed?.(a, change);
      return { raised, cleared };
    },
    /** ISA-18.2 shelving by an operator (audited): not annunciated for `minutes` from now on the engine's clock. */
    async shelve(principal: Actor, alarmId: number, minutes: number, reason: string): Promise<AlarmOut> {
      const existing = await repo.byId(alarmId);
      if (!existing) throw new NotFoundError(`no alarm ${alarmId}`);
      assertPlantScope(principal, existing.plantId);
      if (existing.state === 'cleared') throw new ConflictError(`alarm ${alarmId} is cleared: only an active alarm can be shelved`);
      const until = new Date(clock() + minutes * 60_000);
      const row = (await repo.shelve(alarmId, until, principal.userId, reason))!;
      await audit.record(principal, 'alarm.shelve', `alarm:${alarmId}`, { plantId: row.plantId, rule: row.rule, target: row.target, minutes, until: until.toISOString(), reason });
      const out = toAlarmOut(row);
      await changed?.(out, 'shelved');
      return out;
    },
    /** Ends a shelf early (audited); an active alarm is annunciated again. */
    async unshelve(principal: Actor, alarmId: number, comment?: string): Promise<AlarmOut> {
      const existing = await repo.byId(alarmId);
      if (!existing) throw new NotFoundError(`no alarm ${alarmId}`);
      assertPlantScope(principal, existing.plantId);
      if (!existing.shelvedUntil) throw new ConflictError(`alarm ${alarmId} is not shelved`);
      const row = (await repo.shelve(alarmId, null, null, null))!;
      await audit.record(principal, 'alarm.unshelve', `alarm:${alarmId}`, { plantId: row.plantId, rule: row.rule, target: row.target, ...(comment ? { comment } : {}) });
      const out = toAlarmOut(row);
      if (row.state !== 'cleared') await changed?.(out, row.suppressedReason ? 'suppressed' : 'unshelved');
      return out;
    },
    /** Annunciated (and suppressed) raises per 10 minutes with the flood flag (ISA-18.2 / EEMUA 191 alarm-rate measure). */
    async summary(principal: Actor, plantId: number, s: EffectiveSettings, q: { from?: string; to?: string }): Promise<AlarmSummaryOut> {
      assertPlantScope(principal, plantId);
      const bucket_ms = ALARM_SUMMARY_BUCKET_MIN * 60_000;
      const to_ms = q.to ? Date.parse(q.to) : Math.ceil(clock() / bucket_ms) * bucket_ms;
      const from_ms = q.from ? Date.parse(q.from) : to_ms - 6 * 3_600_000;
      const n = Math.ceil((to_ms - from_ms) / bucket_ms);
      const rows = await repo.raisedPerBucket(plantId, new Date(from_ms), new Date(to_ms), bucket_ms);
      const threshold = s['alarm.flood_per_10min'];
      const buckets = Array.from({ length: n }, (_, i) => {
        const r = rows.find((x) => x.bucket === i);
        const raised = r?.raised ?? 0;
        return { from: new Date(from_ms + i * bucket_ms).toISOString(), raised, suppressed: r?.suppressed ?? 0, flood: raised > threshold };
      });
      return { plantId, from: new Date(from_ms).toISOString(), to: new Date(to_ms).toISOString(), bucket_min: ALARM_SUMMARY_BUCKET_MIN, floodThreshold: threshold, buckets, floodBuckets: buckets.filter((x) => x.flood).length };
    },
    /** ISA-18.2 acknowledge by an operator (audited). A cleared, unacknowledged alarm can be acknowledged too. */
    async acknowledge(principal: Actor, plantId: number, alarmId: number, comment?: string): Promise<AlarmOut> {
      assertPlantScope(principal, plantId);
      const existing = await repo.get(plantId, alarmId);
      if (!existing) throw new NotFoundError(`no alarm ${alarmId} at plant ${plantId}`);
      if (existing.acknowledgedAt) throw new ConflictError(`alarm ${alarmId} was already acknowledged at ${existing.acknowledgedAt.toISOString()}`);
      const row = await repo.acknowledge(plantId, alarmId, principal.userId, new Date(clock()));
      if (!row) throw new ConflictError(`alarm ${alarmId} was acknowledged meanwhile`);
      await audit.record(principal, 'alarm.acknowledge', `alarm:${alarmId}`, { plantId, rule: row.rule, target: row.target, state: row.state, ...(comment ? { comment } : {}) });
      const out = toAlarmOut(row);
      await changed?.(out, 'acknowledged');
      return out;
    },
  };
}
export type AlarmService = ReturnType<typeof createAlarmService>;

/** The spool conditions; when the worker rows cannot be read, this plant's open spool alarms are unknown (kept as they are). */
async function spoolConditions(spoolWorkers: () => Promise<SpoolWorkerView[]>, openRows: readonly Pick<AlarmRow, 'rule' | 'target'>[]): Promise<AlarmCondition[]> {
  const openTargets = openRows.filter((r) => r.rule === 'ingest-spool').map((r) => r.target);
  try {
    return spoolAlarmConditions(await spoolWorkers(), openTargets);
  } catch {
    return openTargets.map((target) => ({ rule: 'ingest-spool' as const, target, priority: ALARM_PRIORITY['ingest-spool'], active: null, value: null, limit: null, message: '' }));
  }
}
