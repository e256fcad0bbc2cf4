/**
 * A duplex stream over one client connection of the embedded broker that gathers what the broker
 * writes during a turn of the event loop and hands it to the socket as one buffer. aedes gets
 * this stream instead of the socket (`broker.handle(stream)` takes any duplex stream).
 *
 * Why: aedes writes each packet through mqtt-packet's writeToStream, which calls
 * `stream.write()` four or five times per PUBLISH (fixed header, length, topic length, topic,
 * packet identifier, payload) and corks only until the next tick. At tens of thousands of QoS 1
 * messages a second — a PUBACK to the publisher and a PUBLISH to ingest for each — the socket
 * machinery and `writev` of those small chunks were the largest single cost of the broker
 * process in tests/bench/ingest.bench.ts. Gathered, the same bytes leave in a few hundred
 * writes per 150 000 messages.
 *
 * What stays the same: the bytes and their order; backpressure (a gathered turn that reaches the
 * high-water mark holds its write callback until the socket has taken it, so Node's Writable
 * queues behind it, answers false and emits 'drain' later, and aedes waits for 'drain' before
 * it delivers more to a slow client); reads are the socket's chunks as they come, paused while
 * the reader does not read; `end()` and `destroy()` hand what is gathered to the socket first
 * (aedes writes a refusing CONNACK and destroys the connection); destroying either side destroys
 * the other. Latency: at most one turn of the event loop.
 *
 * Built only on public interfaces (stream.Duplex, net.Socket's write/end/pause/resume/destroy
 * and events); nothing of aedes, mqtt-packet or Node's stream internals is touched. Its measured
 * gain against aedes writing to the socket itself is printed by `npm run bench:ingest -- --stock`
 * (figures in DEVELOPERS.md, Ingest write path).
 */
import { Duplex } from 'node:stream';
import type net from 'node:net';

type Done = (err?: Error | null) => void;

export class GatheredWrites extends Duplex {
  private chunks: Buffer[] = [];
  private bytes = 0;
  private scheduled = false;
  /** Write callbacks held until the gathered bytes reach the socket (set past the high-water mark). */
  private held: Done[] = [];
  private readonly gatherLimit: number;

  constructor(
    readonly socket: net.Socket,
    highWaterMark = socket.writableHighWaterMark,
  ) {
    super({ allowHalfOpen: false, writableHighWaterMark: highWaterMark, readableHighWaterMark: socket.readableHighWaterMark });
    this.gatherLimit = highWaterMark;
    socket.on('data', (chunk: Buffer) => {
      if (!this.push(chunk)) socket.pause();
    });
    let peerEnded = false;
    socket.on('end', () => {
      peerEnded = true;
      this.push(null);
    });
    socket.on('error', (err) => this.destroy(err));
    socket.on('close', () => {
      // After the peer's FIN the socket closes as soon as its own side has ended, which can be
      // before the reader has taken what is buffered here (a QoS 0 publisher that writes and
      // hangs up): that stays readable until read to its end, as a socket's own buffer would.
      if (peerEnded && !this.readableEnded) this.once('end', () => this.destroy());
      else this.destroy();
    });
    socket.pause();
  }

  override _read(): void {
    this.socket.resume();
  }

  override _write(chunk: Buffer, _encoding: BufferEncoding, done: Done): void {
    this.gather(chunk, done);
  }

  override _writev(chunks: { chunk: Buffer }[], done: Done): void {
    for (let i = 0; i < chunks.length - 1; i++) this.gather(chunks[i]!.chunk, null);
    this.gather(chunks[chunks.length - 1]!.chunk, done);
  }

  override _final(done: Done): void {
    this.flush();
    this.socket.end(() => done());
  }

  override _destroy(err: Error | null, done: Done): void {
    // What is gathered goes to the socket before it is destroyed, as a socket written to directly
    // would have taken it: aedes writes a refusing CONNACK (under mqtt-packet's cork, so it reaches
    // _writev only at the next tick) and destroys the connection a setImmediate later, before
    // this stream's own flush has run.
    this.flush();
    const held = this.held;
    this.held = [];
    for (const cb of held) cb(err);
    if (!this.socket.destroyed) this.socket.destroy(err ?? undefined);
    done(err);
  }

  private gather(chunk: Buffer, done: Done | null): void {
    this.chunks.push(chunk);
    this.bytes += chunk.length;
    if (!this.scheduled) {
      this.scheduled = true;
      setImmediate(() => this.flush());
    }
    if (!done) return;
    // Below the limit the Writable may hand us the next chunk at once; past it, the callback
    // waits for the socket so Node's Writable queues the rest and reports backpressure.
    if (this.bytes < this.gatherLimit) done();
    else this.held.push(done);
  }

  private flush(): void {
    this.scheduled = false;
    if (this.chunks.length === 0) return;
    const data = this.chunks.length === 1 ? this.chunks[0]! : Buffer.concat(this.chunks, this.bytes);
    this.chunks = [];
    this.bytes = 0;
    const held = this.held;
    this.held = [];
    if (this.socket.destroyed || this.socket.writableEnded) return;
    const release = () => {
      for (const cb of held) cb();
    };
    if (this.socket.write(data) || held.length === 0) release();
    else this.socket.once('drain', release);
  }
}

/** The stream aedes should be handed for `socket`. */
export function gatherWrites(socket: net.Socket, highWaterMark?: number): GatheredWrites {
  return new GatheredWrites(socket, highWaterMark);
}
