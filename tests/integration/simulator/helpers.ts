import mqtt, { type MqttClient } from 'mqtt';
export { freePort } from '../../helpers/net.ts';


export interface Received { topic: string; payload: string; at: number }

/** A real MQTT subscriber that records every message on `filter`. */
export async function subscriber(url: string, filter: string): Promise<{ client: MqttClient; messages: Received[] }> {
  const client = await mqtt.connectAsync(url, { reconnectPeriod: 0, protocolVersion: 4 });
  const messages: Received[] = [];
  client.on('message', (topic, payload) => messages.push({ topic, payload: payload.toString('utf8'), at: Date.now() }));
  await client.subscribeAsync(filter, { qos: 0 });
  return { client, messages };
}

export async function until(cond: () => boolean, timeout_ms: number, what: string): Promise<void> {
  const t0 = Date.now();
  while (!cond()) {
    if (Date.now() - t0 > timeout_ms) throw new Error(`timed out after ${timeout_ms} ms waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}
