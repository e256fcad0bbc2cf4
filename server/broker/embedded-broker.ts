/**
 * Embedded MQTT broker for one-machine installs and tests: aedes 1.2 (ESM, created with
 * `await Aedes.createBroker()`; the old default-export factory throws) on a plain TCP server,
 * in-memory persistence: aedes-persistence's memory store with indexed outgoing queues
 * (./indexed-persistence.ts — the stock one slows down quadratically with messages in flight).
 * Packets are parsed and written by aedes and mqtt-packet as they ship, straight to the socket:
 * a Duplex that gathered each turn's writes into one socket write measured no better than this
 * (`npm run bench:ingest -- --stock`, 2026-12-02: single-value QoS 1 19 285/s gathered against
 * 19 948/s direct, broker 16.0 against 17.0 µs CPU per sample) and was dropped.
 *
 * Protocol versions: aedes 1.2 speaks MQTT 3.1 and 3.1.1 only; an MQTT 5 CONNECT is refused
 * with CONNACK return code 1, "unacceptable protocol version" (aedes README: "MQTT 5.0 — not
 * supported yet"; lib/handlers/connect.js). Clients of the embedded broker must connect with
 * protocolVersion 4; MQTT 5 features (shared subscriptions) need an external broker.
 *
 * close() closes the broker (which disconnects every client) and then the listener, so the
 * port is free for an immediate restart on the same port.
 */
import net from 'node:net';
import { Aedes } from 'aedes';
import { IndexedMemoryPersistence } from './indexed-persistence.ts';

export interface EmbeddedBroker {
  url: string;
  port: number;
  close(): Promise<void>;
}

/**
 * The adapter the embedded broker runs on, switchable to aedes' stock behaviour so
 * tests/bench/ingest.bench.ts (`--stock`) can measure what it is worth in the same run.
 */
export interface BrokerAdapters {
  /** ./indexed-persistence.ts instead of aedes-persistence's memory store. */
  indexedPersistence: boolean;
}

export const KEPT_ADAPTERS: BrokerAdapters = { indexedPersistence: true };

/**
 * What the embedded broker does with each new TCP connection. The durable test broker
 * (tests/integration/ingest/helpers.ts) accepts its connections the same way.
 */
export function acceptConnection(broker: Aedes, conn: net.Socket): void {
  broker.handle(conn);
}

export async function startEmbeddedBroker(opts: { host?: string; port: number; adapters?: BrokerAdapters }): Promise<EmbeddedBroker> {
  const host = opts.host ?? '127.0.0.1';
  const adapters = opts.adapters ?? KEPT_ADAPTERS;
  const broker = await Aedes.createBroker(adapters.indexedPersistence ? { persistence: new IndexedMemoryPersistence() } : {});
  // A misbehaving client must never take the process down: aedes reports per-client errors
  // as events; without a listener Node would throw them.
  broker.on('clientError', () => {});
  broker.on('connectionError', () => {});
  const server = net.createServer((conn) => acceptConnection(broker, conn));
  const sockets = new Set<net.Socket>();
  server.on('connection', (s) => {
    sockets.add(s);
    s.on('close', () => sockets.delete(s));
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(opts.port, host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const addr = server.address();
  const port = typeof addr === 'object' && addr ? addr.port : opts.port;
  let closed: Promise<void> | null = null;
  return {
    url: `mqtt://${host.includes(':') ? `[${host}]` : host}:${port}`,
    port,
    close() {
      closed ??= (async () => {
        await new Promise<void>((resolve) => broker.close(() => resolve()));
        // Half-open sockets that never completed CONNECT are not aedes clients yet.
        for (const s of sockets) s.destroy();
        await new Promise<void>((resolve) => server.close(() => resolve()));
      })();
      return closed;
    },
  };
}
