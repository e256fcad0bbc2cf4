import { spawn, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import { INGEST_NODE_ARGS } from '../../../ingest/config.ts';
import { addBrokerUser, ensureBrokerCredentials } from '../../../server/broker/broker-users.ts';
import { BROKER_NODE_ARGS, BROKER_READY } from '../../../server/broker/process.ts';
import { startLocalPostgres, type LocalPostgres } from '../../../server/db/local-postgres.ts';
import { grantRuntimeRoles, runMigrations } from '../../../server/db/migrate.ts';
import { freePort, tempDir, waitFor } from './helpers.ts';

/**
 * The fault run of issue 15 ("Tests"): real processes — a PostgreSQL cluster of its own, the
 * embedded broker process with its durable queue and users, the ingest process — and a test
 * publisher sending QoS 1 samples with known values at a steady rate and a poison message every
 * 200 ms, while the test
 *  1. SIGKILLs ingest during a commit (its writer connection inside a transaction, seen in
 *     pg_stat_activity),
 *  2. stops PostgreSQL for 30 s (pg_ctl stop -m fast as the postgres user, then start) and
 *     SIGKILLs ingest while it spools (spool files growing),
 *  3. SIGKILLs ingest during the replay (spool files being deleted one by one after the restart),
 *  4. restarts the broker.
 * Afterwards every sample the publisher got a PUBACK for is in `samples` exactly once with its
 * value, every poison message is exactly one dead letter with its reason (a redelivery counted
 * on it) and no good sample is one, and no spool file is left. Every step waits on a condition polled with a deadline; no sleeps.
 */
const ROOT = path.resolve(import.meta.dirname, '../../..');
const TAGS = 10;
/** 25 samples every 50 ms: 500 samples/s, the same on every tag. */
const TICK_MS = 50;
const PER_TICK = 25;
const POISON_EVERY_MS = 200;
/** The outage: PostgreSQL stopped for 30 s. */
const PG_OUTAGE_MS = 30_000;
/** Small spool files, so a replay deletes many one by one and the test can see it half done. */
const SPOOL_FILE_BYTES = 4_096;
/** Killed while spooling once this many files were written (about 2 KB a record at these rates). */
const SPOOL_FILES_AT_KILL = 12;

interface Proc {
  child: ChildProcess;
  out: string[];
}

describe('fault run: SIGKILLs, a 30 s database outage, a broker restart and poison, nothing acknowledged lost', () => {
  const cleanups: (() => Promise<void> | void)[] = [];
  afterAll(async () => {
    for (const f of cleanups.reverse()) await Promise.resolve(f()).catch(() => {});
  });

  it('every acknowledged sample stored exactly once, every poison message exactly one dead letter with its reason (redeliveries counted on it), no spool left', { timeout: 300_000 }, async () => {
    // PostgreSQL: a cluster of its own (stopping it must not disturb the shared test cluster),
    // migrated as the owner; ingest connects as its own role, as under npm start.
    const pgDir = tempDir('fault-pg');
    const pgPort = await freePort();
    let cluster: LocalPostgres = await startLocalPostgres({ dataDir: pgDir, port: pgPort });
    cleanups.push(() => cluster.stop());
    await runMigrations(cluster.url);
    await grantRuntimeRoles(cluster.url, cluster.roles);
    const admin = new pg.Pool({ connectionString: cluster.url, max: 2 });
    admin.on('error', () => {});
    cleanups.push(() => admin.end());

    // The broker process as npm start runs it: users, ACL and the QoS 1 queue in its data folder.
    const brokerDir = tempDir('fault-broker');
    const creds = ensureBrokerCredentials(brokerDir, []);
    const publisherPassword = addBrokerUser(brokerDir, { name: 'fault-publisher', publish: ['ft/#'], subscribe: [] });
    const brokerPort = await freePort();
    const brokerUrl = `mqtt://127.0.0.1:${brokerPort}`;
    const startBroker = async (): Promise<Proc> => {
      const child = spawn(process.execPath, [...BROKER_NODE_ARGS, '--import', 'tsx', 'server/broker/main.ts', '127.0.0.1', String(brokerPort), '--data-dir', brokerDir], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
      const p = track(child);
      cleanups.push(() => stopProc(p, 'SIGKILL'));
      await waitFor('the broker ready line', async () => p.out.some((l) => BROKER_READY.test(l)), (x) => x, 30_000);
      return p;
    };
    const broker = await startBroker();

    // The wiring: one MQTT source with the ingest user's credentials, ten tags.
    const t0 = Date.now();
    const plantId = (await admin.query(`INSERT INTO plants (code, name) VALUES ('ft', 'Fault run') RETURNING id`)).rows[0].id as number;
    const sourceId = (
      await admin.query(`INSERT INTO sources (plant_id, name, kind, url, username, secret, options) VALUES ($1, 'broker', 'mqtt', $2, 'ingest', $3, $4) RETURNING id`, [
        plantId,
        brokerUrl,
        creds.ingest.password,
        JSON.stringify({ topics: ['ft/#'], protocolVersion: 4 }),
      ])
    ).rows[0].id as number;
    const tagIds: number[] = [];
    for (let i = 0; i < TAGS; i++) {
      const r = await admin.query(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, $3, $4, 'g/L') RETURNING id`, [plantId, sourceId, `FT-${i}`, `ft/tag${i}`]);
      tagIds.push(r.rows[0].id as number);
    }

    // The ingest process, as npm start runs it; its log file is how the test sees its phases.
    const ingestDir = tempDir('fault-ingest');
    const spoolDir = path.join(ingestDir, 'spool');
    const logFile = path.join(ingestDir, 'logs', 'ingest.log');
    const startIngest = (): Proc => {
      const child = spawn(process.execPath, [...INGEST_NODE_ARGS, '--import', 'tsx', 'ingest/main.ts'], {
        cwd: ROOT,
        env: {
          PATH: process.env.PATH ?? '',
          DATABASE_URL: cluster.ingestUrl,
          FLOCSTREAM_DATA_DIR: ingestDir,
          LOG_LEVEL: 'info',
          INGEST_MQTT_CLIENT_ID: 'fault-run',
          INGEST_STATUS_MS: '500',
          INGEST_SPOOL_FILE_BYTES: String(SPOOL_FILE_BYTES),
        },
        stdio: ['ignore', 'pipe', 'pipe'],
      });
      const p = track(child);
      cleanups.push(() => stopProc(p, 'SIGKILL'));
      return p;
    };
    /** Lines of ingest's log file written by process `pid` with this message. */
    const logged = (pid: number | undefined, msg: string) => readLog(logFile).filter((l) => l.pid === pid && l.msg === msg).length;
    /** When each fault happened, to tell which one a redelivery followed. */
    const faults: { what: string; at: number }[] = [];
    const kill = async (p: Proc) => {
      p.child.kill('SIGKILL');
      await exited(p);
    };
    let ingest = startIngest();
    await waitFor('ingest connected to the broker', async () => logged(ingest.child.pid, 'mqtt connected'), (n) => n > 0, 60_000);

    // The publisher: steady QoS 1 samples with known values and a poison message every 200 ms.
    // Sample k: tag k mod 10, value k, timestamp t0 + k ms (unique per tag). Poison j: a JSON
    // parse error whose text carries a NUL, on a mapped topic.
    const pub = await mqtt.connectAsync(brokerUrl, { protocolVersion: 4, clientId: 'fault-publisher', clean: false, username: 'fault-publisher', password: publisherPassword, reconnectPeriod: 250 });
    cleanups.push(() => pub.endAsync(true));
    const acked = new Set<number>();
    const poisonAcked = new Set<number>();
    const failed: string[] = [];
    let sent = 0;
    let poisonSent = 0;
    let inFlight = 0;
    const send = (c: MqttClient, topic: string, payload: string, done: () => void) => {
      inFlight++;
      c.publish(topic, payload, { qos: 1 }, (err) => {
        inFlight--;
        if (err) failed.push(`${topic}: ${err.message}`);
        else done();
      });
    };
    const good = setInterval(() => {
      for (let i = 0; i < PER_TICK; i++) {
        const k = sent++;
        send(pub, `ft/tag${k % TAGS}`, JSON.stringify({ v: k, ts: new Date(t0 + k).toISOString() }), () => acked.add(k));
      }
    }, TICK_MS);
    const poison = setInterval(() => {
      const j = poisonSent++;
      send(pub, `ft/tag${j % TAGS}`, `{"v": 1, "poison": ${j}, \u0000}`, () => poisonAcked.add(j));
    }, POISON_EVERY_MS);
    const stopPublishing = () => {
      clearInterval(good);
      clearInterval(poison);
    };
    cleanups.push(stopPublishing);
    const stored = () => admin.query(`SELECT count(*)::int AS n FROM samples WHERE tag_id = ANY($1)`, [tagIds]).then((r) => r.rows[0].n as number);
    await waitFor('samples committed', stored, (n) => n > 2_000, 60_000);

    // 1. SIGKILL during a commit: a writer connection of ingest inside a transaction.
    const inCommit = await waitFor(
      'an ingest transaction in progress',
      async () =>
        (
          await admin.query(
            // A batch transaction (BEGIN … COPY, rollups, tag_latest, dead letters … COMMIT), not the partition upkeep or the connection's set-up.
            `SELECT count(*)::int AS n FROM pg_stat_activity WHERE usename = $1 AND application_name = 'flocstream-ingest' AND xact_start IS NOT NULL
               AND state IN ('active', 'idle in transaction') AND query NOT LIKE '%flocstream_ensure_day_partition%' AND query NOT LIKE 'CREATE TEMP%'`,
            [cluster.roles.ingest],
          )
        ).rows[0].n as number,
      (n) => n > 0,
      30_000,
      5,
    );
    await kill(ingest);
    faults.push({ what: 'SIGKILL during a commit', at: Date.now() });
    expect(inCommit).toBeGreaterThan(0);
    ingest = startIngest();
    await waitFor('ingest reconnected after the kill', async () => logged(ingest.child.pid, 'mqtt connected'), (n) => n > 0, 60_000);
    const beforeOutage = await stored();
    await waitFor('committing again', stored, (n) => n > beforeOutage + 1_000, 30_000);

    // 2. PostgreSQL stopped for 30 s; SIGKILL while ingest spools (the spool still growing).
    const spoolFiles = () => (fs.existsSync(spoolDir) ? fs.readdirSync(spoolDir).filter((f) => /^\d{12}\.spool$/.test(f)) : []);
    const outageStart = Date.now();
    cluster.stop();
    const spooledPid = ingest.child.pid;
    await waitFor('ingest spooling', async () => spoolFiles().length, (n) => n >= SPOOL_FILES_AT_KILL, 40_000, 20);
    await kill(ingest);
    faults.push({ what: 'SIGKILL while spooling', at: Date.now() });
    expect(logged(spooledPid, 'database write failed; spooling')).toBe(1);
    const filesAtKill = spoolFiles().length;
    // Restarted during the outage (as the supervisor would): it cannot read its wiring until the database is back.
    ingest = startIngest();
    await waitFor('the 30 s outage', async () => Date.now() - outageStart, (ms) => ms >= PG_OUTAGE_MS, PG_OUTAGE_MS + 5_000, 250);
    cluster = await startLocalPostgres({ dataDir: pgDir, port: pgPort });

    // 3. SIGKILL during the replay: some of the spool files deleted (applied), not all.
    const midReplay = await waitFor('the replay half done', async () => spoolFiles().length, (n) => n > 0 && n < filesAtKill, 60_000, 5);
    await kill(ingest);
    faults.push({ what: 'SIGKILL during the replay', at: Date.now() });
    expect(midReplay).toBeGreaterThan(0);
    ingest = startIngest();
    await waitFor('spool replayed after the restart', async () => spoolFiles().length, (n) => n === 0, 60_000);
    await waitFor('ingest reconnected after the replay', async () => logged(ingest.child.pid, 'mqtt connected'), (n) => n > 0, 60_000);

    // 4. The broker restarted (its queue kept in its data folder); publisher and ingest reconnect.
    const connectedBefore = logged(ingest.child.pid, 'mqtt connected');
    await stopProc(broker, 'SIGTERM');
    faults.push({ what: 'broker restart', at: Date.now() });
    await startBroker(); // stopped by its cleanup
    await waitFor('ingest reconnected to the restarted broker', async () => logged(ingest.child.pid, 'mqtt connected'), (n) => n > connectedBefore, 60_000);
    await waitFor('the publisher reconnected', async () => pub.connected, (x) => x, 30_000);
    const afterBroker = acked.size;
    await waitFor('acknowledgements after the broker restart', async () => acked.size, (n) => n > afterBroker + 1_000, 30_000);

    // The end: every publish answered, everything stored, nothing left in the spool.
    stopPublishing();
    await waitFor('every publish acknowledged', async () => inFlight, (n) => n === 0, 60_000);
    expect(failed).toEqual([]);
    expect(acked.size).toBe(sent);
    expect(poisonAcked.size).toBe(poisonSent);
    await waitFor('every acknowledged sample stored', stored, (n) => n >= acked.size, 60_000);
    const poisonLetters = async () =>
      (await admin.query(`SELECT payload, reason, ts, last_seen_at, times_seen FROM dead_letters WHERE source_id = $1 AND payload LIKE '%"poison"%'`, [sourceId])).rows as {
        payload: string;
        reason: string;
        ts: Date;
        last_seen_at: Date | null;
        times_seen: number;
      }[];
    await waitFor('every poison message dead-lettered', async () => new Set((await poisonLetters()).map((d) => poisonNumber(d.payload))).size, (n) => n >= poisonSent, 30_000);
    expect(spoolFiles()).toEqual([]);

    // Samples: per tag, exactly the acknowledged values, each once.
    const rows = (await admin.query(`SELECT tag_id, value, (extract(epoch FROM ts) * 1000)::float8 AS ms FROM samples WHERE tag_id = ANY($1)`, [tagIds])).rows as { tag_id: number; value: number; ms: number }[];
    expect(rows.length).toBe(acked.size);
    for (let i = 0; i < TAGS; i++) {
      const want = [...acked].filter((k) => k % TAGS === i).sort((a, b) => a - b);
      const got = rows.filter((r) => r.tag_id === tagIds[i]).map((r) => r.value).sort((a, b) => a - b);
      expect(got, `tag ft/tag${i}`).toEqual(want);
    }
    expect(rows.every((r) => r.ms === t0 + r.value)).toBe(true);
    // The rollups count each sample once, replays and redeliveries included.
    expect(Number((await admin.query(`SELECT sum(count) AS n FROM rollup_1m WHERE tag_id = ANY($1)`, [tagIds])).rows[0].n)).toBe(acked.size);

    // Poison: each one exactly one dead letter with the parse error as its reason; no good sample
    // is one. A message the broker delivered again after a fault (committed, its PUBACK not sent
    // or lost with the killed connection or the restarted broker; MQTT 3.1.1 §4.4) is the same
    // delivery: counted on its row (times_seen), not stored twice.
    const letters = await poisonLetters();
    const perPoison = new Map<number, number>();
    for (const d of letters) {
      const j = poisonNumber(d.payload);
      perPoison.set(j, (perPoison.get(j) ?? 0) + 1);
      expect(d.reason).toMatch(/^invalid JSON: /);
      expect(d.reason).not.toContain('\u0000');
      expect(d.times_seen).toBeGreaterThanOrEqual(1);
    }
    const twice = [...perPoison].filter(([, n]) => n > 1).map(([j, n]) => `poison ${j}: ${n} rows`);
    expect(twice, 'a poison message stored as more than one dead letter').toEqual([]);
    expect([...perPoison.keys()].sort((a, b) => a - b)).toEqual(Array.from({ length: poisonSent }, (_, j) => j));
    expect(letters.length).toBe(poisonSent);
    // Which fault each counted redelivery followed (the last arrival after a fault or an MQTT
    // (re)connection of ingest, from its log): reported, for the record of this run.
    const events = [...faults, ...readLog(logFile).filter((l) => l.msg === 'mqtt connected').map((l) => ({ what: `MQTT (re)connection of ingest ${l.pid}`, at: l.time ?? 0 }))].sort((x, y) => x.at - y.at);
    const after = new Map<string, number>();
    for (const d of letters) {
      if (d.times_seen < 2) continue;
      const last = (d.last_seen_at ?? d.ts).getTime();
      const fault = events.filter((f) => f.at > d.ts.getTime() && f.at <= last)[0]?.what ?? 'nothing between the arrivals';
      after.set(fault, (after.get(fault) ?? 0) + 1);
    }
    const redelivered = [...after].map(([what, n]) => `${n} after the ${what}`).join(', ') || 'none';
    console.info(`fault run: ${acked.size} samples acknowledged and stored once; ${poisonSent} poison messages, one dead letter each; delivered again and counted on their row: ${redelivered}`);
    expect((await admin.query(`SELECT count(*)::int AS n FROM dead_letters WHERE payload NOT LIKE '%"poison"%'`)).rows[0].n).toBe(0);
    expect(fs.existsSync(path.join(spoolDir, 'rejected'))).toBe(false);

    // A clean stop at the end still exits 0.
    await stopProc(ingest, 'SIGTERM');
    expect(ingest.child.exitCode).toBe(0);
  });
});

function track(child: ChildProcess): Proc {
  const out: string[] = [];
  const add = (b: Buffer) => out.push(...b.toString().split('\n'));
  child.stdout?.on('data', add);
  child.stderr?.on('data', add);
  return { child, out };
}

function exited(p: Proc): Promise<void> {
  if (p.child.exitCode !== null || p.child.signalCode !== null) return Promise.resolve();
  return new Promise((r) => p.child.once('exit', () => r()));
}

async function stopProc(p: Proc, signal: NodeJS.Signals): Promise<void> {
  if (p.child.exitCode !== null || p.child.signalCode !== null) return;
  p.child.kill(signal);
  await exited(p);
}

/** Ingest's log: one JSON object a line (pino). */
function readLog(file: string): { pid?: number; msg?: string; time?: number }[] {
  if (!fs.existsSync(file)) return [];
  return fs
    .readFileSync(file, 'utf8')
    .split('\n')
    .filter((l) => l.startsWith('{'))
    .map((l) => {
      try {
        return JSON.parse(l) as { pid?: number; msg?: string; time?: number };
      } catch {
        return {};
      }
    });
}

function poisonNumber(payload: string): number {
  const m = /"poison": (\d+)/.exec(payload);
  if (!m) throw new Error(`not a poison payload: ${payload}`);
  return Number(m[1]);
}
