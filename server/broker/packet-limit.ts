/**
 * A maximum MQTT packet size for the embedded broker. aedes 1.2 and mqtt-packet's 3.1.1 parser
 * have no limit of their own: a client announcing a 256 MB remaining length makes the parser
 * buffer it all. MQTT 3.1.1 has no way to refuse one packet (the Maximum Packet Size property
 * came with MQTT 5.0, §3.1.2.11.4), so the broker does what §4.8 prescribes for a protocol
 * violation: it closes the network connection. A QoS 1 PUBLISH refused so is never
 * acknowledged, so its publisher still holds it; nothing the broker acknowledged is lost.
 *
 * How: aedes reads a connection with `conn.read()` (lib/client.js, paused mode); this wraps that
 * public method on the one socket and walks each chunk's
 * fixed headers (§2.2: one type byte, then the Remaining Length, 1–4 bytes of 7 bits each,
 * §2.2.3) without copying or changing a byte; the chunk is handed to aedes as read.
 */
import type net from 'node:net';

/**
 * Default limit: 1 MiB. The simulator's largest batch (10 000 samples of about 90 bytes,
 * simulators/protocols/mqtt-publisher.ts) is about 0.9 MB; plant gateways publish far less.
 */
export const DEFAULT_MAX_PACKET_BYTES = 1024 * 1024;

export function limitPacketSize(conn: net.Socket, maxBytes: number, onRefused: (bytes: number) => void): void {
  const read = conn.read.bind(conn);
  // Where the scanner is: 0 = at a packet's type byte, 1 = inside the Remaining Length, 2 = in the body.
  let state = 0;
  let length = 0;
  let multiplier = 1;
  let lengthBytes = 0;
  let bodyLeft = 0;
  let refused = false;

  const scan = (buf: Buffer): boolean => {
    let i = 0;
    while (i < buf.length) {
      if (state === 0) {
        i++;
        state = 1;
        length = 0;
        multiplier = 1;
        lengthBytes = 0;
      } else if (state === 1) {
        const b = buf[i++]!;
        length += (b & 0x7f) * multiplier;
        multiplier *= 128;
        lengthBytes++;
        // 2 + up to 4 length bytes is the whole fixed header; the limit counts the whole packet.
        if (length + 1 + lengthBytes > maxBytes || (b & 0x80 && lengthBytes === 4)) {
          onRefused(length + 1 + lengthBytes);
          return false;
        }
        if (!(b & 0x80)) {
          bodyLeft = length;
          state = bodyLeft > 0 ? 2 : 0;
        }
      } else {
        const take = Math.min(bodyLeft, buf.length - i);
        i += take;
        bodyLeft -= take;
        if (bodyLeft === 0) state = 0;
      }
    }
    return true;
  };

  conn.read = function limitedRead(size?: number) {
    if (refused) return null;
    const chunk = read(size) as Buffer | string | null;
    if (chunk === null || typeof chunk === 'string') return chunk;
    if (!scan(chunk)) {
      refused = true;
      conn.destroy();
      return null;
    }
    return chunk;
  } as net.Socket['read'];
}
