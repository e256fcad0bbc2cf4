/**
 * Import this module first in a process that moves MQTT packets in bulk (the embedded broker's
 * process, server/broker/main.ts, and the ingest process): when the `debug` package has no
 * namespace enabled, later `require('debug')` calls get a factory whose loggers are empty
 * functions.
 *
 * Why: mqtt-packet traces every step of parsing and writing a packet through `debug`, about ten
 * calls per PUBLISH. A disabled logger still collects its arguments into an array and reads its
 * `enabled` getter on every call: 0.8 µs per parsed PUBLISH and 0.25 µs per written one
 * (measured with mqtt-packet 9.0 on this project's 2-core machine). The broker writes a PUBLISH
 * and a PUBACK per QoS 1 message through mqtt-packet, at tens of thousands of messages a second;
 * reading them mostly bypasses mqtt-packet now (./publish-fast-path.ts), but not for MQTT 5 or
 * the other packet types.
 *
 * What stays the same: nothing is printed either way while no namespace is enabled, and with
 * DEBUG set (the `debug` package reads it itself; we ask the package, not the environment) this
 * module changes nothing, so `DEBUG=mqtt-packet:*` traces as before. Loggers created before this
 * module ran (none, when it is imported first) keep the real implementation. What is lost: turning
 * tracing on later from code with `debug.enable()` does not reach loggers created quiet.
 *
 * ES modules evaluate their imports in order, depth first, so importing this before anything
 * that loads mqtt-packet (aedes, mqtt) is enough; the CommonJS cache it writes is the one those
 * packages' `require('debug')` reads.
 */
import { createRequire } from 'node:module';
import path from 'node:path';

interface DebugFactory {
  (namespace: string): DebugLogger;
  namespaces?: string;
  [key: string]: unknown;
}
interface DebugLogger {
  (...args: unknown[]): void;
  namespace: string;
  enabled: boolean;
  [key: string]: unknown;
}

const require = createRequire(import.meta.url);

/** Marks the quiet factory (tests). */
export const QUIET = Symbol.for('flocstream.quietDebug');

/** Installs the quiet factory when no namespace is enabled; returns whether it did. */
export function quietDebugWhenDisabled(): boolean {
  // The copy mqtt-packet resolves, wherever npm placed it.
  const id = require.resolve('debug', { paths: [path.dirname(require.resolve('mqtt-packet'))] });
  const real = require(id) as DebugFactory;
  if (real.namespaces) return false;
  const quiet = ((namespace: string): DebugLogger => {
    const logger = (() => {}) as unknown as DebugLogger;
    Object.assign(logger, {
      namespace,
      enabled: false,
      useColors: false,
      color: '',
      diff: 0,
      log: real['log'],
      extend: (sub: string, delimiter = ':') => quiet(`${namespace}${delimiter}${sub}`),
      destroy: () => false,
    });
    return logger;
  }) as DebugFactory;
  Object.assign(quiet, real, { default: quiet, debug: quiet, [QUIET]: true });
  const cached = require.cache[id];
  if (!cached) return false;
  cached.exports = quiet;
  return true;
}

quietDebugWhenDisabled();
