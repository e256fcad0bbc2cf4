import { execFile } from 'node:child_process';
import path from 'node:path';
import { promisify } from 'node:util';
import { describe, expect, it } from 'vitest';

const ROOT = path.resolve(import.meta.dirname, '../../..');

/**
 * A fresh process, as the launcher and ingest are: quiet-debug imported first, then the embedded
 * broker and an mqtt.js client carry one QoS 1 message; it reports whether mqtt-packet's `debug`
 * is the quiet one and what reached stderr.
 */
const CHILD = `
import './server/broker/quiet-debug.ts';
import { createRequire } from 'node:module';
import path from 'node:path';
import mqtt from 'mqtt';
import { startEmbeddedBroker } from './server/broker/embedded-broker.ts';
const require = createRequire(import.meta.url);
const fromPacket = createRequire(path.join(path.dirname(require.resolve('mqtt-packet')), 'x.js'));
const quiet = fromPacket('debug')[Symbol.for('flocstream.quietDebug')] === true;
const broker = await startEmbeddedBroker({ port: 0 });
const c = await mqtt.connectAsync(broker.url, { protocolVersion: 4, clientId: 'quiet-debug-test' });
const got = new Promise((r) => c.once('message', (t, p) => r(t + '=' + p)));
await c.subscribeAsync('q/#', { qos: 1 });
await c.publishAsync('q/one', '42', { qos: 1 });
const message = await got;
await c.endAsync();
await broker.close();
console.log(JSON.stringify({ quiet, message }));
`;

async function run(env: Record<string, string>): Promise<{ quiet: boolean; message: string; stderr: string }> {
  const base = { ...process.env };
  delete base.DEBUG;
  const { stdout, stderr } = await promisify(execFile)(process.execPath, ['--import', 'tsx', '--input-type=module', '-e', CHILD], {
    cwd: ROOT,
    env: { ...base, ...env },
    timeout: 60_000,
  });
  return { ...(JSON.parse(stdout.trim().split('\n').pop()!) as { quiet: boolean; message: string }), stderr };
}

describe('quiet-debug (MQTT packet tracing off while no DEBUG namespace is enabled)', () => {
  it('gives mqtt-packet quiet loggers and the broker still carries a QoS 1 message', async () => {
    const r = await run({});
    expect(r.quiet).toBe(true);
    expect(r.message).toBe('q/one=42');
    expect(r.stderr).not.toMatch(/mqtt-packet/);
  }, 60_000);

  it('changes nothing when DEBUG names a namespace: mqtt-packet traces as before', async () => {
    const r = await run({ DEBUG: 'mqtt-packet:*' });
    expect(r.quiet).toBe(false);
    expect(r.message).toBe('q/one=42');
    expect(r.stderr).toMatch(/mqtt-packet:parser/);
    expect(r.stderr).toMatch(/mqtt-packet:writeToStream/);
  }, 60_000);
});
