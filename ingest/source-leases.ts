import type pg from 'pg';

/**
 * A lease expires after this many heartbeats without renewal, so a dead worker's sources are
 * taken over within that many heartbeats of its last one.
 */
export const LEASE_HEARTBEATS = 3;

/** The lease on a source itself (`mqtt_client_id` ''), as opposed to one MQTT 5 shared session. */
export const SOURCE_LEASE = '';

/**
 * Leases in `source_leases` (server/db/schema/ingest.ts), on the database's clock only. Each
 * statement is atomic on its own: a lease is taken or renewed by one upsert whose update applies
 * only `WHERE expires_at < now() OR holder = me`, so two workers racing for a free lease cannot
 * both get it (the row lock of ON CONFLICT DO UPDATE serialises them, the loser's WHERE fails).
 */
export class SourceLeases {
  constructor(
    private pool: pg.Pool,
    readonly workerId: string,
    private ttl_ms: number,
  ) {}

  /**
   * Takes or renews one lease. `held`: this worker holds it afterwards; otherwise `expiresIn_ms`
   * says when the other holder's lease runs out (so a stand-by can try again right then instead
   * of at its next heartbeat).
   */
  async take(sourceId: number, mqttClientId = SOURCE_LEASE): Promise<{ held: boolean; expiresIn_ms: number | null }> {
    // The outer SELECT reads the table as it was before the upsert: the other holder's expiry.
    const r = await this.pool.query<{ held: boolean; expires_in_ms: number | null }>(
      `WITH up AS (
         INSERT INTO source_leases (source_id, mqtt_client_id, holder, expires_at)
         VALUES ($1, $2, $3, now() + make_interval(secs => $4 / 1000.0))
         ON CONFLICT (source_id, mqtt_client_id) DO UPDATE SET holder = excluded.holder, expires_at = excluded.expires_at
         WHERE source_leases.expires_at < now() OR source_leases.holder = excluded.holder
         RETURNING holder)
       SELECT EXISTS (SELECT 1 FROM up) AS held,
              (SELECT extract(epoch FROM expires_at - now()) * 1000 FROM source_leases WHERE source_id = $1 AND mqtt_client_id = $2)::float8 AS expires_in_ms`,
      [sourceId, mqttClientId, this.workerId, this.ttl_ms],
    );
    const row = r.rows[0]!;
    return { held: row.held, expiresIn_ms: row.held ? null : row.expires_in_ms };
  }

  /** Ends a lease now without deleting it (a clean stop of a shared session: another worker adopts it at once). */
  async expire(sourceId: number, mqttClientId: string): Promise<void> {
    await this.pool.query(`UPDATE source_leases SET expires_at = now() - interval '1 millisecond' WHERE source_id = $1 AND mqtt_client_id = $2 AND holder = $3`, [sourceId, mqttClientId, this.workerId]);
  }

  /** MQTT 5 shared sessions of these sources whose worker has died (lease expired), oldest first. */
  async orphanedSessions(sourceIds: number[]): Promise<{ sourceId: number; mqttClientId: string }[]> {
    if (!sourceIds.length) return [];
    const r = await this.pool.query<{ source_id: number; mqtt_client_id: string }>(
      `SELECT source_id, mqtt_client_id FROM source_leases
       WHERE source_id = ANY($1) AND mqtt_client_id <> '' AND expires_at < now() ORDER BY expires_at`,
      [sourceIds],
    );
    return r.rows.map((x) => ({ sourceId: x.source_id, mqttClientId: x.mqtt_client_id }));
  }

  /** Gives a lease up (clean stop, source removed, a shared session ended). */
  async release(sourceId: number, mqttClientId = SOURCE_LEASE): Promise<void> {
    await this.pool.query(`DELETE FROM source_leases WHERE source_id = $1 AND mqtt_client_id = $2 AND holder = $3`, [sourceId, mqttClientId, this.workerId]);
  }
}
