/**
 * The embedded broker as a process of its own:
 *
 *   node <BROKER_NODE_ARGS> --import tsx server/broker/main.ts <host> <port> [--stock-persistence]
 *
 * A process of its own gives the broker a core's worth of event loop that the API's requests do
 * not share (at tens of thousands of messages a second the broker is the busiest thing on the
 * machine) and its own garbage-collection settings (./process.ts). Prints one line matching
 * BROKER_READY once listening. SIGTERM or SIGINT closes the broker (clients are disconnected, the
 * port is freed) and exits 0; a port that cannot be bound is reported and exits 1. The
 * `--stock-persistence` switch runs aedes' own store instead of the adapter
 * (./embedded-broker.ts BrokerAdapters): only `npm run bench:ingest -- --stock` passes it.
 */
import { KEPT_ADAPTERS, startEmbeddedBroker } from './embedded-broker.ts';

const args = process.argv.slice(2);
const flags = new Set(args.filter((a) => a.startsWith('--')));
const [host = '127.0.0.1', portArg = ''] = args.filter((a) => !a.startsWith('--'));
const unknown = [...flags].filter((f) => f !== '--stock-persistence');
if (unknown.length) {
  console.error(`unknown option ${unknown.join(', ')}; known: --stock-persistence`);
  process.exit(2);
}
const adapters = {
  indexedPersistence: KEPT_ADAPTERS.indexedPersistence && !flags.has('--stock-persistence'),
};
const port = Number(portArg);
if (!Number.isInteger(port) || port < 0 || port > 65_535) {
  console.error(`usage: server/broker/main.ts <host> <port>; "${portArg}" is not a TCP port`);
  process.exit(2);
}

try {
  const broker = await startEmbeddedBroker({ host, port, adapters });
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
