import { get } from 'sparkplug-payload';
import type { UMetric } from 'sparkplug-payload/lib/sparkplugbpayload';

const codec = get('spBv1.0')!;

export interface EdgeMessage {
  topic: string;
  payload: Buffer;
}

/**
 * A test Sparkplug B edge node built with the same package ingest decodes with (Eclipse Tahu's
 * sparkplug-payload). It follows Sparkplug 3.0 as an edge node must: topics
 * `spBv1.0/group/TYPE/node[/device]` (§4.1), NBIRTH with seq 0, a bdSeq metric and
 * `Node Control/Rebirth` = false (§4.2.1), names and aliases in births, aliases only in DATA
 * (tck-id-payloads-alias-birth-requirement, tck-id-payloads-alias-data-cmd-requirement), and seq
 * + 1 mod 256 on every later message (tck-id-payloads-sequence-num-incrementing). `skipSeq`
 * makes a gap on purpose.
 */
export class TestEdgeNode {
  private seq = 0;

  constructor(
    readonly group: string,
    readonly node: string,
    public bdSeq = 0,
  ) {}

  private topic(type: string, device?: string): string {
    return `spBv1.0/${this.group}/${type}/${this.node}${device ? `/${device}` : ''}`;
  }

  private nextSeq(): number {
    this.seq = (this.seq + 1) % 256;
    return this.seq;
  }

  /** Leaves `n` sequence numbers out, as if those messages were lost. */
  skipSeq(n: number): void {
    this.seq = (this.seq + n) % 256;
  }

  nbirth(ts: number, metrics: UMetric[]): EdgeMessage {
    this.seq = 0;
    const all: UMetric[] = [{ name: 'bdSeq', type: 'Int64', value: this.bdSeq, timestamp: ts }, { name: 'Node Control/Rebirth', type: 'Boolean', value: false, timestamp: ts }, ...metrics];
    return { topic: this.topic('NBIRTH'), payload: Buffer.from(codec.encodePayload({ timestamp: ts, seq: 0, metrics: all })) };
  }

  dbirth(device: string, ts: number, metrics: UMetric[]): EdgeMessage {
    return { topic: this.topic('DBIRTH', device), payload: Buffer.from(codec.encodePayload({ timestamp: ts, seq: this.nextSeq(), metrics })) };
  }

  ndata(ts: number, metrics: UMetric[]): EdgeMessage {
    return { topic: this.topic('NDATA'), payload: Buffer.from(codec.encodePayload({ timestamp: ts, seq: this.nextSeq(), metrics })) };
  }

  ddata(device: string, ts: number, metrics: UMetric[]): EdgeMessage {
    return { topic: this.topic('DDATA', device), payload: Buffer.from(codec.encodePayload({ timestamp: ts, seq: this.nextSeq(), metrics })) };
  }

  ddeath(device: string, ts: number): EdgeMessage {
    return { topic: this.topic('DDEATH', device), payload: Buffer.from(codec.encodePayload({ timestamp: ts, seq: this.nextSeq(), metrics: [] })) };
  }

  /** The Will registered at CONNECT: only the bdSeq metric, no seq (tck-id-topics-ndeath-payload, tck-id-topics-ndeath-seq). */
  ndeath(ts: number): EdgeMessage {
    return { topic: this.topic('NDEATH'), payload: Buffer.from(codec.encodePayload({ timestamp: ts, metrics: [{ name: 'bdSeq', type: 'Int64', value: this.bdSeq }] })) };
  }
}

/** Decodes an NCMD the way an edge node would, to check what a host sent it. */
export function decodeCommand(payload: Buffer): { name: string | null | undefined; value: unknown }[] {
  return (codec.decodePayload(payload).metrics ?? []).map((m) => ({ name: m.name, value: m.value }));
}
