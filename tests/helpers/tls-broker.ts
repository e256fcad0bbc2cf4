import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import type net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import tls from 'node:tls';
import { Aedes } from 'aedes';

/** Debian's openssl makes the test certificate; without it the TLS tests are skipped. */
export const haveOpenssl = spawnSync('openssl', ['version']).status === 0;

/** The one user the TLS test broker admits. */
export const TLS_BROKER_USER = { username: 'plant', password: 'tls-secret-123' };

export interface TlsTestBroker {
  url: string;
  /** PEM of the broker's self-signed certificate, its own CA. */
  ca: string;
  close(): Promise<void>;
}

/**
 * An external broker as a plant would run it: aedes behind TLS on 127.0.0.1 with a self-signed
 * certificate for that address (made with openssl), admitting only TLS_BROKER_USER.
 */
export async function startTlsTestBroker(): Promise<TlsTestBroker> {
  const certDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-tls-'));
  const key = path.join(certDir, 'key.pem');
  const cert = path.join(certDir, 'cert.pem');
  const r = spawnSync('openssl', ['req', '-x509', '-newkey', 'rsa:2048', '-nodes', '-days', '1', '-subj', '/CN=127.0.0.1', '-addext', 'subjectAltName=IP:127.0.0.1', '-keyout', key, '-out', cert], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`openssl failed: ${r.stderr}`);
  const ca = fs.readFileSync(cert, 'utf8');
  const broker = await Aedes.createBroker({ authenticate: (_c, u, p, done) => done(null, u === TLS_BROKER_USER.username && p?.toString() === TLS_BROKER_USER.password) });
  const server = tls.createServer({ key: fs.readFileSync(key), cert: ca }, (s) => broker.handle(s));
  const port = await new Promise<number>((resolve) => server.listen(0, '127.0.0.1', () => resolve((server.address() as net.AddressInfo).port)));
  return {
    url: `mqtts://127.0.0.1:${port}`,
    ca,
    async close() {
      await new Promise<void>((res) => broker.close(() => res()));
      await new Promise<void>((res) => server.close(() => res()));
      fs.rmSync(certDir, { recursive: true, force: true });
    },
  };
}
