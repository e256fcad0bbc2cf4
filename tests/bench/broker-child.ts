/**
 * The embedded broker in a process of its own for the ingest benchmark, as `npm start` runs it
 * in the launcher: its CPU is then the broker's alone, not shared with the benchmark's own
 * writer rounds, polling and latency publisher. Prints {"url"} once listening; SIGTERM closes it.
 *
 *   broker-child.ts <port>
 */
import '../../server/broker/quiet-debug.ts';
import { startEmbeddedBroker } from '../../server/broker/embedded-broker.ts';

const broker = await startEmbeddedBroker({ host: '127.0.0.1', port: Number(process.argv[2]) });
console.log(JSON.stringify({ url: broker.url }));
process.on('SIGTERM', () => {
  void broker.close().then(() => process.exit(0));
});
