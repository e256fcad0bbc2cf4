/**
 * The one place that knows how Flocstream connects to an MQTT broker for a source: connect
 * options from the `sources` row (credentials, the CA of a TLS broker, Keep Alive), the protocol
 * level to try first and the MQTT 5.0 → 3.1.1 fallback. Ingest's connector (./mqtt-connector.ts)
 * and the API's "test connection" (server/services/wiring.service.ts) both connect through it,
 * so a test that passes means ingest can connect the same way.
 */
import { randomBytes } from 'node:crypto';
import mqtt, { type IClientOptions } from 'mqtt';
import { mqttSourceOptions, type ConnectionTestOut, type MqttSourceOptions } from '../../shared/contracts/wiring.ts';

/** The `sources` row fields a connection needs. */
export interface MqttSourceRow {
  id: number;
  url: string;
  username: string | null;
  secret: string | null;
  options: unknown;
}

export type ProtocolLevel = 4 | 5;

/** The source's options with defaults applied; invalid ones fall back to the defaults, with the reason. */
export function mqttOptionsOf(source: Pick<MqttSourceRow, 'options'>): { options: MqttSourceOptions; error: string | null } {
  const parsed = mqttSourceOptions.safeParse(source.options ?? {});
  if (parsed.success) return { options: parsed.data, error: null };
  return { options: mqttSourceOptions.parse({}), error: `invalid source options, using defaults: ${parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}` };
}

/** The protocol level to try first: 3.1.1 only when asked for, else 5.0. */
export function firstProtocol(o: MqttSourceOptions): ProtocolLevel {
  return o.protocolVersion === 4 ? 4 : 5;
}

/** MQTT 3.1.1 CONNACK return code 1 and MQTT 5.0 reason code 0x84: protocol version refused. */
const UNSUPPORTED_PROTOCOL = new Set([1, 0x84]);

/**
 * The level to retry with after a failed connect, or null. With protocolVersion auto, a broker
 * that refuses 5.0 — CONNACK reason 0x84 Unsupported Protocol Version (MQTT 5.0 §3.2.2.2), or
 * return code 1 from a 3.1.1 broker (MQTT 3.1.1 §3.2.2.3) — is retried with 3.1.1. The embedded
 * broker (aedes) speaks 3.1.1 only and answers 5.0 so.
 */
export function fallbackProtocol(o: MqttSourceOptions, tried: ProtocolLevel, err: unknown): ProtocolLevel | null {
  const code = (err as { code?: unknown } | null)?.code;
  return o.protocolVersion === 'auto' && tried === 5 && typeof code === 'number' && UNSUPPORTED_PROTOCOL.has(code) ? 4 : null;
}

/**
 * mqtt.js options for this source at this protocol level: credentials (never in the URL, see
 * sourceUrlIssue), Keep Alive, and for mqtts:// and wss:// the source's CA certificate when it
 * has one (the broker's certificate is always verified). `session` adds what the caller's kind
 * of connection needs (client identifier, Clean Start, reconnect policy, MQTT 5 properties).
 */
export function connectOptions(source: MqttSourceRow, o: MqttSourceOptions, protocolVersion: ProtocolLevel, session: IClientOptions): IClientOptions {
  const tls = /^(mqtts|wss):/.test(source.url);
  return {
    protocolVersion,
    keepalive: o.keepalive_s,
    ...(source.username ? { username: source.username } : {}),
    ...(source.secret ? { password: source.secret } : {}),
    ...(tls ? { rejectUnauthorized: true, ...(o.tlsCa_pem ? { ca: o.tlsCa_pem } : {}) } : {}),
    ...session,
  };
}

/**
 * "Test connection": one CONNECT with Clean Start and a client identifier of its own (MQTT 5.0
 * §3.1.4: a second connection with ingest's identifier would make the broker close ingest's
 * session), CONNACK awaited for at most `timeoutMs`, then DISCONNECT; with protocolVersion auto
 * a refusal of 5.0 is retried as 3.1.1 (fallbackProtocol).
 */
export async function testMqttConnection(source: MqttSourceRow, timeoutMs: number): Promise<ConnectionTestOut> {
  const { options: o, error: optionsError } = mqttOptionsOf(source);
  if (optionsError) return { ok: false, latency_ms: 0, error: optionsError.slice(0, 300) };
  const t0 = performance.now();
  let protocolVersion: ProtocolLevel | null = firstProtocol(o);
  let lastError = '';
  while (protocolVersion !== null) {
    try {
      const client = await mqtt.connectAsync(
        source.url,
        connectOptions(source, o, protocolVersion, {
          clientId: `flocstream-test-${source.id}-${randomBytes(4).toString('hex')}`,
          clean: true,
          connectTimeout: timeoutMs,
          reconnectPeriod: 0,
          keepalive: 10,
        }),
        false,
      );
      const latency_ms = Math.round(performance.now() - t0);
      await client.endAsync().catch(() => {});
      return { ok: true, latency_ms, details: { protocolVersion: protocolVersion === 5 ? '5.0' : '3.1.1' } };
    } catch (err) {
      const e = err as { code?: number | string; message?: string };
      lastError = e.message || String(e.code ?? err);
      protocolVersion = fallbackProtocol(o, protocolVersion, err);
    }
  }
  return { ok: false, latency_ms: Math.round(performance.now() - t0), error: lastError.slice(0, 300) };
}
