import net from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { coalesceWrites } from '../../../server/broker/coalesce-writes.ts';
import { nextEvent } from '../../helpers/wait.ts';

/** A connected loopback pair: `server` is the broker's side (wrapped), `client` reads. */
async function pair(): Promise<{ server: net.Socket; client: net.Socket; received: () => Buffer; closed: Promise<void>; srv: net.Server }> {
  const srv = net.createServer();
  await new Promise<void>((r) => srv.listen(0, '127.0.0.1', () => r()));
  const port = (srv.address() as net.AddressInfo).port;
  const accepted = new Promise<net.Socket>((r) => srv.once('connection', r));
  const client = net.connect(port, '127.0.0.1');
  const chunks: Buffer[] = [];
  client.on('data', (d: Buffer) => chunks.push(d));
  const closed = new Promise<void>((r) => client.once('end', () => r()));
  const server = await accepted;
  return { server, client, received: () => Buffer.concat(chunks), closed, srv };
}

const cleanups: (() => void)[] = [];
afterEach(() => {
  for (const f of cleanups.splice(0)) f();
});

describe('coalesceWrites (embedded broker connections)', () => {
  it('hands one turn of writes to the socket as one write, bytes and order unchanged, end() last', async () => {
    const { server, client, received, closed, srv } = await pair();
    cleanups.push(() => (client.destroy(), srv.close()));
    let socketWrites = 0;
    const original = server.write;
    server.write = function (this: net.Socket, ...args: unknown[]) {
      socketWrites++;
      return (original as (...a: unknown[]) => boolean).apply(this, args);
    } as typeof server.write;
    coalesceWrites(server);
    const expected: Buffer[] = [];
    for (let i = 0; i < 1_000; i++) {
      const b = Buffer.from([i & 0xff, (i >> 8) & 0xff]);
      server.write(b);
      expected.push(b);
      server.write(`t/${i}`, 'utf8'); // as mqtt-packet writes a topic
      expected.push(Buffer.from(`t/${i}`));
    }
    await new Promise((r) => setImmediate(r));
    expect(socketWrites).toBe(1);
    // a write with a callback goes behind what was gathered, and its callback is called
    let called = false;
    server.write(Buffer.from('A'));
    server.write(Buffer.from('B'), () => (called = true));
    expected.push(Buffer.from('AB'));
    server.write(Buffer.from('tail'));
    expected.push(Buffer.from('tail'));
    server.end();
    await closed;
    expect(called).toBe(true);
    expect(received().equals(Buffer.concat(expected))).toBe(true);
  });

  it('answers false past the high-water mark and emits drain once the gathered bytes are handed on', async () => {
    const { server, client, srv } = await pair();
    cleanups.push(() => (client.destroy(), server.destroy(), srv.close()));
    coalesceWrites(server, 100);
    expect(server.write(Buffer.alloc(60))).toBe(true);
    const drained = new Promise<void>((r) => server.once('drain', () => r()));
    expect(server.write(Buffer.alloc(60))).toBe(false);
    await drained;
    expect(server.write(Buffer.alloc(10))).toBe(true);
  });

  it('drops what is gathered when the connection is destroyed, without an error', async () => {
    const { server, client, srv } = await pair();
    cleanups.push(() => (client.destroy(), srv.close()));
    const errors: Error[] = [];
    server.on('error', (e) => errors.push(e));
    coalesceWrites(server);
    server.write(Buffer.from('lost'));
    const closed = nextEvent(server, 'close');
    server.destroy();
    await closed;
    // The gathered write flushes on setImmediate, queued before this one: it has run by now.
    await new Promise((r) => setImmediate(r));
    expect(errors).toEqual([]);
  });
});
