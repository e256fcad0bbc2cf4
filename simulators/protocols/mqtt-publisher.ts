/**
 * Publishes the simulated plant's MQTT tags in Flocstream's payload format
 * (shared/contracts/mqtt-payload.ts): one value per message on the tag's topic, or batched as
 * one `{"samples": [...]}` message per tick on `<plant>/batch` whose items name their topics.
 *
 * QoS 0, as plant edge gateways usually publish fast analog values. While the broker is away,
 * readings are dropped and counted (never queued without bound); mqtt.js reconnects on its own
 * every reconnectPeriod_ms, so a broker restart only leaves a gap.
 */
import mqtt, { type MqttClient } from 'mqtt';
import { batchPayload, singleValuePayload, type BatchItem, type SingleValuePayload } from '../../shared/contracts/mqtt-payload.js';
import type { Reading } from '../instruments/instrument.js';

export interface MqttPublisherOptions {
  url: string;
  plantCode: string;
  batch?: boolean;
  clientId?: string;
  /** Broker credentials; the embedded broker refuses a CONNECT without them (server/broker/broker-users.ts). */
  username?: string;
  password?: string;
  reconnectPeriod_ms?: number;
  protocolVersion?: 4 | 5;
  onError?: (e: Error) => void;
}

export interface MqttPublisherStats {
  published: number;
  dropped: number;
  invalid: number;
  connects: number;
}

export class MqttPublisher {
  private readonly client: MqttClient;
  readonly stats: MqttPublisherStats = { published: 0, dropped: 0, invalid: 0, connects: 0 };
  readonly batchTopic: string;

  constructor(private readonly opts: MqttPublisherOptions) {
    this.batchTopic = `${opts.plantCode}/batch`;
    this.client = mqtt.connect(opts.url, {
      clientId: opts.clientId ?? `flocstream-sim-${opts.plantCode}-${Math.random().toString(16).slice(2, 10)}`,
      reconnectPeriod: opts.reconnectPeriod_ms ?? 1000,
      connectTimeout: 5000,
      protocolVersion: opts.protocolVersion ?? 4,
      queueQoSZero: false,
      clean: true,
      ...(opts.username ? { username: opts.username, password: opts.password ?? '' } : {}),
    });
    this.client.on('connect', () => {
      this.stats.connects++;
    });
    // Connection errors are expected while a broker restarts; report, never throw.
    this.client.on('error', (e) => opts.onError?.(e));
  }

  get connected(): boolean {
    return this.client.connected;
  }

  private payload(r: Reading): SingleValuePayload {
    return { v: r.value, ts: new Date(r.ts_ms).toISOString(), q: r.quality };
  }

  publish(readings: Reading[]): void {
    if (readings.length === 0) return;
    if (!this.client.connected) {
      this.stats.dropped += readings.length;
      return;
    }
    if (this.opts.batch) {
      const samples: BatchItem[] = readings.map((r) => ({ topic: r.tag.address, ...this.payload(r) }));
      for (let i = 0; i < samples.length; i += 10_000) {
        const body = { samples: samples.slice(i, i + 10_000) };
        const ok = batchPayload.safeParse(body);
        if (!ok.success) {
          this.stats.invalid += body.samples.length;
          continue;
        }
        this.client.publish(this.batchTopic, JSON.stringify(body), { qos: 0 });
        this.stats.published += body.samples.length;
      }
      return;
    }
    for (const r of readings) {
      const body = this.payload(r);
      // Our own contract, checked on the way out: a model bug must not reach the product as data.
      if (!singleValuePayload.safeParse(body).success) {
        this.stats.invalid++;
        continue;
      }
      this.client.publish(r.tag.address, JSON.stringify(body), { qos: 0 });
      this.stats.published++;
    }
  }

  async close(): Promise<void> {
    await this.client.endAsync(true);
  }
}
