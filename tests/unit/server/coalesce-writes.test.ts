import net from 'node:net';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { gatherWrites } from '../../../server/broker/coalesce-writes.ts';
import { nextEvent } from '../../helpers/wait.ts';

/** A connected loopback pair: `server` is the broker's side (the socket under the adapter), `client` the peer. */
async function pair(): Promise<{ server: net.Socket; client: net.Socket; received: () => Buffer; ended: Promise<void>; srv: net.Server }> {
  const srv = net.createServer();
  await new Promise<void>((r) => srv.listen(0, '127.0.0.1', () => r()));
  const port = (srv.address() as net.AddressInfo).port;
  const accepted = new Promise<net.Socket>((r) => srv.once('connection', r));
  const client = net.connect(port, '127.0.0.1');
  const chunks: Buffer[] = [];
  client.on('data', (d: Buffer) => chunks.push(d));
  const ended = new Promise<void>((r) => client.once('end', () => r()));
  const server = await accepted;
  return { server, client, received: () => Buffer.concat(chunks), ended, srv };
}

const cleanups: (() => void)[] = [];
afterEach(() => {
  for (const f of cleanups.splice(0)) f();
});

const turn = () => new Promise((r) => setImmediate(r));

describe('gatherWrites (embedded broker connections)', () => {
  it('hands one turn of writes to the socket as one write, bytes and order unchanged, end() last', async () => {
    const { server, client, received, ended, srv } = await pair();
    cleanups.push(() => (client.destroy(), srv.close()));
    const socketWrite = vi.spyOn(server, 'write');
    const stream = gatherWrites(server);
    const expected: Buffer[] = [];
    for (let i = 0; i < 1_000; i++) {
      const b = Buffer.from([i & 0xff, (i >> 8) & 0xff]);
      stream.write(b);
      expected.push(b);
      stream.write(`t/${i}`, 'utf8'); // as mqtt-packet writes a topic
      expected.push(Buffer.from(`t/${i}`));
    }
    await turn();
    expect(socketWrite).toHaveBeenCalledTimes(1);
    // a write with a callback is gathered too, and its callback is called
    let called = false;
    stream.write(Buffer.from('A'));
    stream.write(Buffer.from('B'), () => (called = true));
    stream.write(Buffer.from('tail'));
    expected.push(Buffer.from('ABtail'));
    stream.end();
    await ended;
    expect(called).toBe(true);
    expect(socketWrite).toHaveBeenCalledTimes(2);
    expect(received().equals(Buffer.concat(expected))).toBe(true);
  });

  it('forwards what the peer sends, in order, to a reader that reads in paused mode as aedes does', async () => {
    const { server, client, srv } = await pair();
    cleanups.push(() => (client.destroy(), server.destroy(), srv.close()));
    const stream = gatherWrites(server);
    const got: Buffer[] = [];
    stream.on('readable', () => {
      for (let b = stream.read() as Buffer | null; b; b = stream.read() as Buffer | null) got.push(b);
    });
    const sent = Buffer.alloc(200_000, 0);
    for (let i = 0; i < sent.length; i++) sent[i] = (i * 31) & 0xff;
    client.end(sent);
    await nextEvent(stream, 'end');
    expect(Buffer.concat(got).equals(sent)).toBe(true);
  });

  it('keeps what the peer sent before hanging up readable after the socket has closed, until read to the end', async () => {
    const { server, client, srv } = await pair();
    cleanups.push(() => (client.destroy(), server.destroy(), srv.close()));
    const stream = gatherWrites(server);
    // Under the stream's high-water mark, so the socket reads it all, sees the FIN and closes.
    const sent = Buffer.alloc(8_000, 7);
    client.end(sent); // a QoS 0 publisher that writes everything and hangs up
    stream.read(0); // the reader asks once (the socket flows), then is busy elsewhere
    await nextEvent(server, 'close');
    const got: Buffer[] = [];
    stream.on('readable', () => {
      for (let b = stream.read() as Buffer | null; b; b = stream.read() as Buffer | null) got.push(b);
    });
    await nextEvent(stream, 'end');
    expect(Buffer.concat(got).length).toBe(sent.length);
  });

  it('answers false past the high-water mark and emits drain once the gathered bytes are handed on', async () => {
    const { server, client, srv } = await pair();
    cleanups.push(() => (client.destroy(), server.destroy(), srv.close()));
    const stream = gatherWrites(server, 100);
    expect(stream.write(Buffer.alloc(60))).toBe(true);
    expect(stream.write(Buffer.alloc(60))).toBe(true); // gathered past the mark: its callback is held
    expect(stream.write(Buffer.alloc(60))).toBe(false); // queued behind it: backpressure
    await nextEvent(stream, 'drain');
    expect(stream.write(Buffer.alloc(10))).toBe(true);
  });

  it('hands what is gathered to the socket before destroying it, as aedes refuses a CONNECT (corked CONNACK, destroy a setImmediate later)', async () => {
    const { server, client, received, srv } = await pair();
    cleanups.push(() => (client.destroy(), srv.close()));
    const closed = nextEvent(client, 'close');
    const stream = gatherWrites(server);
    const errors: Error[] = [];
    stream.on('error', (e) => errors.push(e));
    // mqtt-packet's writeToStream: cork, write the parts, uncork on the next tick; aedes then
    // calls its done callback with setImmediate, which closes the client (conn.destroy()).
    stream.cork();
    stream.write(Buffer.from([0x20, 0x02]));
    stream.write(Buffer.from([0x00, 0x01]));
    process.nextTick(() => stream.uncork());
    setImmediate(() => stream.destroy());
    await closed;
    expect(received().equals(Buffer.from([0x20, 0x02, 0x00, 0x01]))).toBe(true);
    expect(server.destroyed).toBe(true);
    expect(errors).toEqual([]);
  });

  it('is destroyed with its socket, without an error', async () => {
    const { server, client, srv } = await pair();
    cleanups.push(() => (client.destroy(), srv.close()));
    const stream = gatherWrites(server);
    const errors: Error[] = [];
    stream.on('error', (e) => errors.push(e));
    stream.write(Buffer.from('late'));
    const streamClosed = nextEvent(stream, 'close');
    server.destroy();
    await streamClosed;
    expect(stream.destroyed).toBe(true);
    await turn(); // the gathered flush finds the socket destroyed and drops the bytes quietly
    expect(errors).toEqual([]);
  });
});
