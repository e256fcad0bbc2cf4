import type pg from 'pg';
import type { StreamEventName } from '../../shared/contracts/plant-api.ts';

/** The PostgreSQL channel of the live stream (server/services/stream.service.ts documents the payload). */
export const STREAM_CHANNEL = 'flocstream_stream';

/** Cross-process publish through PostgreSQL (delivered when the caller's transaction commits). */
export async function notifyStream(db: pg.Pool | pg.ClientBase, plantId: number, event: StreamEventName, data: unknown): Promise<void> {
  await db.query('SELECT pg_notify($1, $2)', [STREAM_CHANNEL, JSON.stringify({ plantId, event, data })]);
}

/** The stream channel: NOTIFY to it, and one dedicated LISTEN connection. */
export function streamRepository(pool: pg.Pool) {
  return {
    notify: (plantId: number, event: StreamEventName, data: unknown) => notifyStream(pool, plantId, event, data),
    /**
     * Takes one pool connection, LISTENs on the channel and hands every payload to `onPayload`;
     * `onError` hears of a lost connection. Returns the close function, which destroys the
     * connection rather than returning it: a pooled connection must not keep its LISTEN.
     */
    async listen(onPayload: (payload: string | undefined) => void, onError: (err: unknown) => void): Promise<() => void> {
      const client = await pool.connect();
      let closed = false;
      const close = () => {
        if (closed) return;
        closed = true;
        client.release(true);
      };
      try {
        client.on('notification', (m) => onPayload(m.payload));
        client.on('error', onError);
        await client.query(`LISTEN ${STREAM_CHANNEL}`);
      } catch (err) {
        close();
        throw err;
      }
      return close;
    },
  };
}
export type StreamRepository = ReturnType<typeof streamRepository>;
