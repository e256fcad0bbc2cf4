import fs from 'node:fs';
import fsp from 'node:fs/promises';
import path from 'node:path';
import zlib from 'node:zlib';
import type { DeadLetter, Sample } from '../pipeline/types.ts';

/** One spooled batch, as it will be replayed. */
export interface SpoolRecord {
  samples: Sample[];
  deadLetters: DeadLetter[];
}

/**
 * Append-only spool for batches the database could not take. A record is
 * `[u32 length][u32 CRC-32 of the body][body: JSON]`, appended and fsync'd before the batch is
 * acknowledged to its source, so an acknowledged sample survives SIGKILL and power loss. A
 * record torn by a crash mid-append fails its length or CRC check; it was never acknowledged
 * (the fsync had not returned), so replay stops reading that file there.
 *
 * Files are `<dir>/<sequence>.spool`; a new file is started after every replay so replayed files
 * can be deleted whole. Replay is oldest-first, which keeps the original order.
 */
export class Spool {
  private fh: fsp.FileHandle | null = null;
  private currentSeq = 0;
  private bytes = 0;
  private files: number[] = [];

  private constructor(private dir: string) {}

  static async open(dir: string): Promise<Spool> {
    await fsp.mkdir(dir, { recursive: true });
    const s = new Spool(dir);
    s.files = (await fsp.readdir(dir))
      .map((f) => /^(\d{12})\.spool$/.exec(f)?.[1])
      .filter((x): x is string => x !== undefined)
      .map(Number)
      .sort((a, b) => a - b);
    for (const seq of s.files) s.bytes += (await fsp.stat(s.file(seq))).size;
    s.currentSeq = (s.files.at(-1) ?? 0) + 1;
    return s;
  }

  private file(seq: number): string {
    return path.join(this.dir, `${String(seq).padStart(12, '0')}.spool`);
  }

  get sizeBytes(): number {
    return this.bytes;
  }

  get fileCount(): number {
    return this.files.length;
  }

  get isEmpty(): boolean {
    return this.files.length === 0;
  }

  /** Appends one record and returns after fdatasync. */
  async append(rec: SpoolRecord): Promise<void> {
    const body = Buffer.from(
      JSON.stringify({ s: rec.samples.flatMap((x) => [x.tagId, x.ts, x.value, x.quality]), d: rec.deadLetters }),
      'utf8',
    );
    const head = Buffer.allocUnsafe(8);
    head.writeUInt32LE(body.length, 0);
    head.writeUInt32LE(zlib.crc32(body), 4);
    if (!this.fh) {
      const seq = this.currentSeq;
      this.fh = await fsp.open(this.file(seq), 'a');
      if (!this.files.includes(seq)) this.files.push(seq);
      // The new directory entry must be durable too (POSIX fsync(2) on the directory).
      await syncDir(this.dir);
    }
    await this.fh.writev([head, body]);
    await this.fh.datasync();
    this.bytes += head.length + body.length;
  }

  /**
   * Replays every file oldest-first through `apply`, deleting each file once all its records
   * were applied. The caller serialises replay and append (BatchWriter does), and the file being
   * appended to is closed first so later appends start a new one.
   * Stops at the first failing `apply` and rethrows; what was applied stays deleted only by whole
   * files, so a record may be applied twice — the writer's ON CONFLICT path makes that harmless.
   */
  async replay(apply: (recs: SpoolRecord[]) => Promise<void>, maxSamplesPerApply = 50_000): Promise<number> {
    let applied = 0;
    while (this.files.length) {
      const seq = this.files[0]!;
      if (seq === this.currentSeq && this.fh) {
        await this.fh.close();
        this.fh = null;
        this.currentSeq++;
      }
      const name = this.file(seq);
      const buf = await fsp.readFile(name).catch(() => Buffer.alloc(0));
      let chunk: SpoolRecord[] = [];
      let n = 0;
      for (const rec of readRecords(buf)) {
        chunk.push(rec);
        n += rec.samples.length;
        if (n >= maxSamplesPerApply) {
          await apply(chunk);
          applied += chunk.length;
          chunk = [];
          n = 0;
        }
      }
      if (chunk.length) {
        await apply(chunk);
        applied += chunk.length;
      }
      await fsp.rm(name, { force: true });
      this.bytes = Math.max(0, this.bytes - buf.length);
      this.files.shift();
    }
    return applied;
  }

  /** Moves a file that cannot be applied aside (kept for inspection, out of the replay). */
  async quarantineOldest(): Promise<string | null> {
    const seq = this.files[0];
    if (seq === undefined) return null;
    if (seq === this.currentSeq && this.fh) {
      await this.fh.close();
      this.fh = null;
      this.currentSeq++;
    }
    const from = this.file(seq);
    const to = path.join(this.dir, 'rejected', path.basename(from));
    await fsp.mkdir(path.dirname(to), { recursive: true });
    const size = (await fsp.stat(from).catch(() => ({ size: 0 }))).size;
    await fsp.rename(from, to).catch(() => {});
    this.bytes = Math.max(0, this.bytes - size);
    this.files.shift();
    return to;
  }

  async close(): Promise<void> {
    await this.fh?.close();
    this.fh = null;
  }
}

async function syncDir(dir: string): Promise<void> {
  const d = await fsp.open(dir, fs.constants.O_RDONLY);
  try {
    await d.sync();
  } finally {
    await d.close();
  }
}

/** Parses records until the end or the first torn/corrupt one. */
export function* readRecords(buf: Buffer): Generator<SpoolRecord> {
  let o = 0;
  while (o + 8 <= buf.length) {
    const len = buf.readUInt32LE(o);
    const crc = buf.readUInt32LE(o + 4);
    if (o + 8 + len > buf.length) return;
    const body = buf.subarray(o + 8, o + 8 + len);
    if (zlib.crc32(body) !== crc) return;
    const j = JSON.parse(body.toString('utf8')) as { s: (number | null)[]; d: DeadLetter[] };
    const samples: Sample[] = [];
    for (let i = 0; i + 3 < j.s.length; i += 4) {
      samples.push({ tagId: j.s[i] as number, ts: j.s[i + 1] as number, value: j.s[i + 2] as number | null, quality: j.s[i + 3] as number });
    }
    yield { samples, deadLetters: j.d };
    o += 8 + len;
  }
}
