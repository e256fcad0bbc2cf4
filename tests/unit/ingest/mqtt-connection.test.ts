import { describe, expect, it } from 'vitest';
import { connectOptions, fallbackProtocol, firstProtocol, mqttOptionsOf } from '../../../ingest/mqtt/mqtt-connection.ts';
import { mqttOptionsInput } from '../../../shared/contracts/wiring.ts';

const CA = '-----BEGIN CERTIFICATE-----\nMIIB\n-----END CERTIFICATE-----\n';
const row = (url: string, options: unknown = {}) => ({ id: 7, url, username: 'plant', secret: 's3cret', options });

describe('MQTT connection options (one definition for the API and ingest)', () => {
  it('applies the defaults ingest runs with and drops keys it does not know', () => {
    const { options, error } = mqttOptionsOf(row('mqtt://b', { topics: ['a/#'], legacy: 1 }));
    expect(error).toBeNull();
    expect(options).toEqual({ topics: ['a/#'], protocolVersion: 'auto', sharedGroup: 'flocstream', keepalive_s: 30, payload: 'json', requestRebirth: false });
  });

  it('takes a shared group that is a valid ShareName, or null for no shared subscription (MQTT 5.0 §4.8.2)', () => {
    expect(mqttOptionsOf(row('mqtt://b', { sharedGroup: null })).options.sharedGroup).toBeNull();
    expect(mqttOptionsInput.safeParse({ sharedGroup: 'plant-1.ingest' }).success).toBe(true);
    // A ShareName must not contain "/", "+" or "#".
    for (const bad of ['a/b', 'a+', '#', '']) expect(mqttOptionsInput.safeParse({ sharedGroup: bad }).success).toBe(false);
  });

  it('falls back to the defaults with the reason when the stored options are invalid', () => {
    const { options, error } = mqttOptionsOf(row('mqtt://b', { keepalive_s: 1 }));
    expect(options.keepalive_s).toBe(30);
    expect(error).toMatch(/keepalive_s/);
  });

  it('accepts in the API exactly the keys ingest reads, strictly', () => {
    expect(mqttOptionsInput.safeParse({ topics: ['a/#'], protocolVersion: 4, clientId: 'ingest-1', keepalive_s: 60, tlsCa_pem: CA }).success).toBe(true);
    expect(mqttOptionsInput.safeParse({ legacy: 1 }).success).toBe(false);
    expect(mqttOptionsInput.safeParse({ tlsCa_pem: 'not a certificate' }).success).toBe(false);
  });

  it('passes credentials, Keep Alive and, only over TLS, the CA certificate', () => {
    const o = mqttOptionsOf(row('mqtts://b', { tlsCa_pem: CA, keepalive_s: 45 })).options;
    const tls = connectOptions(row('mqtts://b:8883'), o, 5, { clientId: 'x' });
    expect(tls).toMatchObject({ protocolVersion: 5, keepalive: 45, username: 'plant', password: 's3cret', ca: CA, rejectUnauthorized: true, clientId: 'x' });
    const plain = connectOptions(row('mqtt://b:1883'), o, 4, { clientId: 'x' });
    expect(plain).not.toHaveProperty('ca');
    expect(plain.protocolVersion).toBe(4);
  });

  it('falls back from 5.0 to 3.1.1 only on a protocol-version refusal with protocolVersion auto', () => {
    // MQTT 5.0 §3.2.2.2: reason code 0x84 Unsupported Protocol Version; MQTT 3.1.1 §3.2.2.3: return code 1.
    const auto = mqttOptionsOf(row('mqtt://b')).options;
    expect(firstProtocol(auto)).toBe(5);
    expect(fallbackProtocol(auto, 5, { code: 0x84 })).toBe(4);
    expect(fallbackProtocol(auto, 5, { code: 1 })).toBe(4);
    expect(fallbackProtocol(auto, 5, { code: 5 })).toBeNull(); // not authorised: retrying 3.1.1 would not help
    expect(fallbackProtocol(auto, 4, { code: 1 })).toBeNull();
    const five = mqttOptionsOf(row('mqtt://b', { protocolVersion: 5 })).options;
    expect(fallbackProtocol(five, 5, { code: 0x84 })).toBeNull();
    expect(firstProtocol(mqttOptionsOf(row('mqtt://b', { protocolVersion: 4 })).options)).toBe(4);
  });
});
