/**
 * The embedded broker as a process of its own:
 *
 *   node <BROKER_NODE_ARGS> --import tsx server/broker/main.ts <host> <port>
 *        [--data-dir D] [--max-packet-bytes N] [--stock-persistence]
 *
 * A process of its own gives the broker a core's worth of event loop that the API's requests do
 * not share (at tens of thousands of messages a second the broker is the busiest thing on the
 * machine) and its own garbage-collection settings (./process.ts). Prints one line matching
 * BROKER_READY once listening. SIGTERM or SIGINT closes the broker (clients are disconnected, the
 * port is freed, the queue log is synced) and exits 0; a port that cannot be bound is reported
 * and exits 1.
 *
 * `--data-dir D` (what `npm start` passes) turns on what a broker shared by a host needs: users
 * and topic filters from `D/broker/` (./broker-users.ts; the launcher creates the built-in users
 * first), and the sessions and QoS 1 queue kept in `D/broker/queue.log` across a restart
 * (./durable-persistence.ts). Without it the broker admits anyone and keeps its queue in memory:
 * only tests and the benchmark run it so. `--max-packet-bytes` (default 1 MiB,
 * ./packet-limit.ts) applies either way. `--stock-persistence` runs aedes' own store instead of
 * the adapter (./embedded-broker.ts BrokerAdapters): only
 * `npm run bench:ingest -- --stock` passes them.
 */
import { parseArgs } from 'node:util';
import { brokerDir, createBrokerAuth } from './broker-users.ts';
import { DurablePersistence } from './durable-persistence.ts';
import { KEPT_ADAPTERS, startEmbeddedBroker } from './embedded-broker.ts';
import { DEFAULT_MAX_PACKET_BYTES } from './packet-limit.ts';

let parsed;
try {
  parsed = parseArgs({
    allowPositionals: true,
    options: {
      'data-dir': { type: 'string' },
      'max-packet-bytes': { type: 'string' },
      'stock-persistence': { type: 'boolean' },
    },
  });
} catch (err) {
  console.error(`${(err as Error).message}; known: --data-dir, --max-packet-bytes, --stock-persistence`);
  process.exit(2);
}
const { values, positionals } = parsed;
const [host = '127.0.0.1', portArg = ''] = positionals;
const adapters = {
  indexedPersistence: KEPT_ADAPTERS.indexedPersistence && !values['stock-persistence'],
};
const port = Number(portArg);
if (!Number.isInteger(port) || port < 0 || port > 65_535) {
  console.error(`usage: server/broker/main.ts <host> <port>; "${portArg}" is not a TCP port`);
  process.exit(2);
}
const maxPacketBytes = values['max-packet-bytes'] === undefined ? DEFAULT_MAX_PACKET_BYTES : Number(values['max-packet-bytes']);
if (!Number.isInteger(maxPacketBytes) || maxPacketBytes < 1024) {
  console.error(`--max-packet-bytes must be a whole number of bytes, at least 1024; got "${values['max-packet-bytes']}"`);
  process.exit(2);
}

try {
  const dataDir = values['data-dir'];
  let durable: DurablePersistence | undefined;
  if (dataDir) {
    durable = new DurablePersistence(brokerDir(dataDir));
    const restored = await durable.open();
    if (restored.queued) console.log(`restored ${restored.queued} queued messages for ${restored.clients} persistent sessions`);
  }
  const broker = await startEmbeddedBroker({
    host,
    port,
    adapters,
    maxPacketBytes,
    ...(dataDir ? { auth: createBrokerAuth(dataDir), ...(durable ? { durable } : {}) } : {}),
    onRefused: (what) => console.error(what),
  });
  console.log(`embedded MQTT broker listening at ${broker.url}`);
  let closing = false;
  const close = () => {
    if (closing) return;
    closing = true;
    void broker.close().then(() => process.exit(0));
  };
  process.on('SIGTERM', close);
  process.on('SIGINT', close);
} catch (err) {
  const e = err as NodeJS.ErrnoException;
  console.error(e.code === 'EADDRINUSE' ? `port ${port} on ${host} is already in use by another program; set FLOCSTREAM_MQTT_PORT to a free port` : `embedded broker failed to start: ${e.message}`);
  process.exit(1);
}
