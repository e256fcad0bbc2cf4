/**
 * How the embedded broker runs as a process of its own (server/broker/main.ts): `npm start`
 * starts it so (scripts/start.ts), and bench:ingest starts it the same way, so the benchmark
 * measures the broker a person runs. Kept apart from main.ts so the launcher can read it without
 * loading aedes.
 */

/**
 * Node options of the broker process. A QoS 1 message to a persistent session stays in the
 * broker's outgoing queue until the subscriber's PUBACK, and ingest sends that only after its
 * batch is committed, a few hundred milliseconds later: at 50 000 messages a second some 15 000
 * queued messages survive every scavenge of V8's default 16 MB semi-space and are copied again
 * each time. 64 MB semi-spaces make scavenges a quarter as frequent; in tests/bench/ingest.bench.ts's
 * single-value phase the broker's garbage-collection time fell by about 40 % (880 → 540 ms per
 * 300 000 messages). The cost is memory: the broker's peak RSS relaying 900 000 QoS 1 messages at
 * about 140 000/s was 203 MB against 125 MB with the default, which the broker process can spare
 * (ingest, whose memory has a target, keeps the default).
 */
export const BROKER_NODE_ARGS: readonly string[] = ['--max-semi-space-size=64'];

/** The line main.ts prints once it listens; the launcher and the benchmark wait for it. */
export const BROKER_READY = /^embedded MQTT broker listening at (mqtt:\/\/\S+)$/;
