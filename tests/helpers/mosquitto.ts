import { spawn, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import path from 'node:path';
import { MOSQUITTO_PATH } from '../../scripts/system-deps.ts';
import { freePort } from './net.ts';
import { waitFor } from './wait.ts';

export interface Mosquitto {
  url: string;
  port: number;
  proc: ChildProcess;
  /** What the broker wrote to stderr (errors and warnings only). */
  log(): string;
  stop(): Promise<void>;
}

/**
 * Debian's mosquitto (an MQTT 5.0 broker) on a random 127.0.0.1 port with a configuration file
 * written into `dir`: anonymous clients allowed (a throwaway local broker), no persistence, and
 * no cap on the QoS 1 messages queued or in flight per client — mosquitto's defaults (1000
 * queued, 20 in flight, mosquitto.conf(5)) would drop a dead worker's queued share of a shared
 * subscription and hold each session to 20 messages awaiting ingest's commit-then-PUBACK. An
 * installation that scales ingest out needs the same two settings.
 */
export async function startMosquitto(dir: string): Promise<Mosquitto> {
  const port = await freePort();
  const conf = path.join(dir, 'mosquitto.conf');
  fs.mkdirSync(dir, { recursive: true });
  fs.writeFileSync(
    conf,
    [
      `listener ${port} 127.0.0.1`,
      'allow_anonymous true',
      'persistence false',
      'max_queued_messages 0',
      'max_inflight_messages 0',
      'log_dest stderr',
      'log_type error',
      'log_type warning',
      '',
    ].join('\n'),
  );
  const proc = spawn(MOSQUITTO_PATH, ['-c', conf], { stdio: ['ignore', 'ignore', 'pipe'] });
  let err = '';
  proc.stderr!.on('data', (b: Buffer) => (err += b.toString()));
  const accepts = () =>
    new Promise<boolean>((resolve) => {
      const s = net.connect(port, '127.0.0.1');
      s.once('connect', () => (s.destroy(), resolve(true)));
      s.once('error', () => resolve(false));
    });
  await waitFor(async () => proc.exitCode === null && (await accepts()), undefined, { what: `mosquitto listening on ${port} (${err})`, timeout_ms: 10_000, every_ms: 50 });
  return {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    proc,
    log: () => err,
    async stop() {
      if (proc.exitCode !== null) return;
      const exited = new Promise((r) => proc.once('exit', r));
      proc.kill('SIGTERM');
      await exited;
    },
  };
}
