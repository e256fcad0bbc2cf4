import fs from 'node:fs';
import fsp from 'node:fs/promises';
import path from 'node:path';
import zlib from 'node:zlib';
import { receiptKey, type DeadLetter, type Sample } from '../pipeline/types.ts';

/** One spooled batch, as it will be replayed. */
export interface SpoolRecord {
  samples: Sample[];
  deadLetters: DeadLetter[];
}

export interface SpoolOptions {
  /** A new file is started once the one being appended to holds this many bytes. */
  fileBytes?: number;
  /**
   * Once the files still to replay hold this many bytes the spool takes no more records
   * (`capReached`); the writer then holds its batch unacknowledged and raises backpressure.
   */
  maxBytes?: number;
}

/** A spool file that could not be read: kept where it is, out of the replay, and reported. */
export interface UnreadableSpoolFile {
  file: string;
  bytes: number;
  /** Where reading stopped; the records before it were committed. */
  atByte: number;
  error: string;
}

/** What ingest's status shows of the spool (the API's `ingest-spool` alarms read it). */
export interface SpoolStatus {
  /** The spool folder (names the spool in the cap alarm). */
  dir: string;
  files: number;
  bytes: number;
  /** Bytes still to replay (what the cap counts) and the cap. */
  pendingBytes: number;
  maxBytes: number;
  unreadable: UnreadableSpoolFile[];
  capReached: boolean;
}

export const DEFAULT_SPOOL_FILE_BYTES = 64 * 1024 * 1024;
export const DEFAULT_SPOOL_MAX_BYTES = 2 * 1024 * 1024 * 1024;
/** No record is this large (a 50 000-sample batch is about 2 MB); a larger length is corruption. */
const MAX_RECORD_BYTES = 256 * 1024 * 1024;
const HEAD_BYTES = 8;

/** Reading the spool failed (as opposed to applying what was read). */
class SpoolReadError extends Error {}

/**
 * Append-only spool for batches the database could not take. A record is
 * `[u32 length][u32 CRC-32 of the body][body: JSON]`, appended and fsync'd before the batch is
 * acknowledged to its source, so an acknowledged sample survives SIGKILL and power loss.
 *
 * Files are `<dir>/<sequence>.spool`; a new file is started at `fileBytes`, after every replay
 * and after a failed append (so nothing is ever appended behind a half-written record). Replay
 * is oldest-first, which keeps the original order, and reads one record at a time with
 * positional reads, so a file of any size replays in the memory of one record.
 *
 * A file is deleted only once every record in it was applied. A record cut short at the very end
 * of a file is a torn append (a crash before its fsync returned, so it was never acknowledged)
 * and ends the file. Anything else that cannot be read — an I/O error, a bad checksum with data
 * after it — keeps the file where it is, out of the replay, listed in `status().unreadable` for
 * the `ingest` alarm; the records before it are applied. It is tried again when ingest restarts.
 */
export class Spool {
  private fh: fsp.FileHandle | null = null;
  private currentSeq = 0;
  /** Bytes of the file being appended to. */
  private currentBytes = 0;
  private files: number[] = [];
  private sizes = new Map<number, number>();
  /** Sums of `sizes`, all files and unreadable ones, kept as counters: the writer asks on every enqueue. */
  private totalBytes = 0;
  private unreadableBytes = 0;
  /** Bytes of each file already applied in this process (a replay that failed resumes there). */
  private applied = new Map<number, number>();
  private unreadable = new Map<number, UnreadableSpoolFile>();
  private readonly fileBytes: number;
  private readonly maxBytes: number;

  private constructor(
    private dir: string,
    opts: SpoolOptions,
  ) {
    this.fileBytes = opts.fileBytes ?? DEFAULT_SPOOL_FILE_BYTES;
    this.maxBytes = opts.maxBytes ?? DEFAULT_SPOOL_MAX_BYTES;
  }

  static async open(dir: string, opts: SpoolOptions = {}): Promise<Spool> {
    await fsp.mkdir(dir, { recursive: true });
    const s = new Spool(dir, opts);
    s.files = (await fsp.readdir(dir))
      .map((f) => /^(\d{12})\.spool$/.exec(f)?.[1])
      .filter((x): x is string => x !== undefined)
      .map(Number)
      .sort((a, b) => a - b);
    for (const seq of s.files) {
      try {
        s.setSize(seq, (await fsp.stat(s.file(seq))).size);
      } catch (err) {
        s.setSize(seq, 0);
        s.markUnreadable(seq, 0, err);
      }
    }
    s.currentSeq = (s.files.at(-1) ?? 0) + 1;
    return s;
  }

  private file(seq: number): string {
    return path.join(this.dir, `${String(seq).padStart(12, '0')}.spool`);
  }

  /** Bytes in all spool files, unreadable ones included. */
  get sizeBytes(): number {
    return this.totalBytes;
  }

  /** Bytes in the files still to replay (what the cap counts). */
  get pendingBytes(): number {
    return this.totalBytes - this.unreadableBytes;
  }

  private setSize(seq: number, bytes: number): void {
    this.totalBytes += bytes - (this.sizes.get(seq) ?? 0);
    this.sizes.set(seq, bytes);
  }

  get fileCount(): number {
    return this.files.length;
  }

  /** True when nothing is left to replay (unreadable files wait for a restart). */
  get isEmpty(): boolean {
    return this.files.every((seq) => this.unreadable.has(seq));
  }

  get capReached(): boolean {
    return this.pendingBytes >= this.maxBytes;
  }

  status(): SpoolStatus {
    return {
      dir: this.dir,
      files: this.files.length,
      bytes: this.sizeBytes,
      pendingBytes: this.pendingBytes,
      maxBytes: this.maxBytes,
      unreadable: [...this.unreadable.values()],
      capReached: this.capReached,
    };
  }

  /**
   * Forgets the unreadable files an operator has moved away (or deleted): what to do with a
   * damaged file is the operator's call, and once it is out of the spool folder it is no longer
   * this spool's, so it leaves `status().unreadable` and its alarm clears. A file still in place
   * stays listed (and is tried again at the next start). Returns the files forgotten.
   */
  async forgetRemoved(): Promise<string[]> {
    const gone: string[] = [];
    for (const [seq, u] of [...this.unreadable]) {
      try {
        await fsp.lstat(u.file);
        continue;
      } catch (err) {
        if ((err as NodeJS.ErrnoException).code !== 'ENOENT') continue;
      }
      this.unreadable.delete(seq);
      this.unreadableBytes -= this.sizes.get(seq) ?? 0;
      this.setSize(seq, 0);
      this.sizes.delete(seq);
      this.applied.delete(seq);
      this.files = this.files.filter((s) => s !== seq);
      gone.push(u.file);
    }
    return gone;
  }

  /**
   * Appends one record and returns after fdatasync. Throws when the cap is reached (the caller
   * checks `capReached` first) or the write fails; either way nothing was acknowledged.
   */
  async append(rec: SpoolRecord): Promise<void> {
    if (this.capReached) throw new Error(`spool full: ${this.pendingBytes} bytes to replay, cap ${this.maxBytes}`);
    const body = encodeRecord(rec);
    if (body.length > MAX_RECORD_BYTES) throw new Error(`spool record of ${body.length} bytes exceeds ${MAX_RECORD_BYTES}`);
    const head = Buffer.allocUnsafe(HEAD_BYTES);
    head.writeUInt32LE(body.length, 0);
    head.writeUInt32LE(zlib.crc32(body), 4);
    const seq = this.currentSeq;
    if (!this.fh) {
      this.fh = await fsp.open(this.file(seq), 'a');
      this.currentBytes = (await this.fh.stat()).size;
      if (!this.files.includes(seq)) this.files.push(seq);
      this.setSize(seq, this.currentBytes);
      // The new directory entry must be durable too (POSIX fsync(2) on the directory).
      await syncDir(this.dir);
    }
    const before = this.currentBytes;
    try {
      await this.fh.writev([head, body]);
      await this.fh.datasync();
    } catch (err) {
      // Part of the record may be in the file; cut it off and go on in a new file, so a later
      // record never sits behind a torn one (replay stops a file at the first torn record).
      await this.fh.truncate(before).catch(() => {});
      await this.rotate();
      throw err;
    }
    this.currentBytes = before + head.length + body.length;
    this.setSize(seq, this.currentBytes);
    if (this.currentBytes >= this.fileBytes) await this.rotate();
  }

  /** Closes the file being appended to; the next append starts a new one. */
  private async rotate(): Promise<void> {
    const fh = this.fh;
    this.fh = null;
    this.currentSeq++;
    this.currentBytes = 0;
    await fh?.close().catch(() => {});
  }

  /**
   * Replays the readable files oldest-first through `apply`, record by record in chunks of up to
   * `maxSamplesPerApply` samples, deleting each file once all its records were applied. The
   * caller serialises replay and append (BatchWriter does); the file being appended to is closed
   * first so later appends start a new one. Stops at the first failing `apply` and rethrows; the
   * next replay resumes after the last applied chunk (after a restart, from the file's start: a
   * sample applied twice is a no-op by the primary key, and the writer's replay skips a dead
   * letter already stored, SampleStore.write `replay`).
   * Returns the number of records applied.
   */
  async replay(apply: (recs: SpoolRecord[]) => Promise<void>, maxSamplesPerApply = 50_000): Promise<number> {
    let applied = 0;
    for (;;) {
      const seq = this.files.find((s) => !this.unreadable.has(s));
      if (seq === undefined) return applied;
      if (seq === this.currentSeq && this.fh) await this.rotate();
      const name = this.file(seq);
      let pos = this.applied.get(seq) ?? 0;
      let fh: fsp.FileHandle;
      try {
        fh = await fsp.open(name, 'r');
      } catch (err) {
        this.markUnreadable(seq, pos, err);
        continue;
      }
      try {
        let size: number;
        try {
          size = (await fh.stat()).size;
        } catch (err) {
          this.markUnreadable(seq, pos, err);
          continue;
        }
        let chunk: SpoolRecord[] = [];
        let n = 0;
        let chunkEnd = pos;
        const flushChunk = async () => {
          await apply(chunk);
          applied += chunk.length;
          this.applied.set(seq, chunkEnd);
          chunk = [];
          n = 0;
        };
        let stop: 'end' | { error: string; at: number } = 'end';
        while (pos < size) {
          let r: { rec: SpoolRecord; next: number } | 'torn' | { error: string };
          try {
            r = await readRecordAt(fh, pos, size);
          } catch (err) {
            r = { error: (err as Error).message };
          }
          if (r === 'torn') break;
          if ('error' in r) {
            stop = { error: r.error, at: pos };
            break;
          }
          chunk.push(r.rec);
          n += r.rec.samples.length + r.rec.deadLetters.length;
          pos = r.next;
          chunkEnd = pos;
          if (n >= maxSamplesPerApply) await flushChunk();
        }
        if (chunk.length) await flushChunk();
        if (stop !== 'end') {
          this.markUnreadable(seq, stop.at, new SpoolReadError(stop.error));
          // Retried only by a restart: an operator may have repaired the disk or the file.
          continue;
        }
      } finally {
        await fh.close().catch(() => {});
      }
      await fsp.rm(name, { force: true });
      this.files = this.files.filter((s) => s !== seq);
      this.setSize(seq, 0);
      this.sizes.delete(seq);
      this.applied.delete(seq);
    }
  }

  private markUnreadable(seq: number, atByte: number, err: unknown): void {
    if (!this.unreadable.has(seq)) this.unreadableBytes += this.sizes.get(seq) ?? 0;
    this.unreadable.set(seq, { file: this.file(seq), bytes: this.sizes.get(seq) ?? 0, atByte, error: (err as Error)?.message ?? String(err) });
  }

  /**
   * Keeps a record the database refused even after the writer made it a plain dead letter, in
   * `<dir>/rejected/` (same record format), for inspection. Never holds a good sample: the
   * writer puts only single refused rows here, never a batch.
   */
  async quarantine(rec: SpoolRecord): Promise<string> {
    const dir = path.join(this.dir, 'rejected');
    await fsp.mkdir(dir, { recursive: true });
    const name = path.join(dir, 'refused.spool');
    const body = encodeRecord(rec);
    const head = Buffer.allocUnsafe(HEAD_BYTES);
    head.writeUInt32LE(body.length, 0);
    head.writeUInt32LE(zlib.crc32(body), 4);
    const fh = await fsp.open(name, 'a');
    try {
      await fh.writev([head, body]);
      await fh.datasync();
    } finally {
      await fh.close();
    }
    return name;
  }

  async close(): Promise<void> {
    await this.fh?.close();
    this.fh = null;
  }
}

function encodeRecord(rec: SpoolRecord): Buffer {
  return Buffer.from(JSON.stringify({ s: rec.samples.flatMap((x) => [x.tagId, x.ts, x.value, x.quality]), d: rec.deadLetters }), 'utf8');
}

function decodeBody(body: Buffer): SpoolRecord {
  const j = JSON.parse(body.toString('utf8')) as { s: (number | null)[]; d: (Omit<DeadLetter, 'key'> & { key?: string })[] };
  const samples: Sample[] = [];
  for (let i = 0; i + 3 < j.s.length; i += 4) {
    samples.push({ tagId: j.s[i] as number, ts: j.s[i + 1] as number, value: j.s[i + 2] as number | null, quality: j.s[i + 3] as number });
  }
  // A record written before dead letters had a delivery key is identified by its receipt.
  return { samples, deadLetters: j.d.map((d) => ({ ...d, key: typeof d.key === 'string' ? d.key : receiptKey(d) })) };
}

async function readExactly(fh: fsp.FileHandle, len: number, pos: number): Promise<Buffer> {
  const buf = Buffer.allocUnsafe(len);
  let got = 0;
  while (got < len) {
    const { bytesRead } = await fh.read(buf, got, len - got, pos + got);
    if (bytesRead === 0) throw new SpoolReadError(`unexpected end of file at byte ${pos + got}`);
    got += bytesRead;
  }
  return buf;
}

/**
 * The record at `pos`: the record and where the next starts, 'torn' for a record cut short at
 * the end of the file (never acknowledged), or the reason it cannot be read. I/O errors throw.
 */
async function readRecordAt(fh: fsp.FileHandle, pos: number, size: number): Promise<{ rec: SpoolRecord; next: number } | 'torn' | { error: string }> {
  if (pos + HEAD_BYTES > size) return 'torn';
  const head = await readExactly(fh, HEAD_BYTES, pos);
  const len = head.readUInt32LE(0);
  const next = pos + HEAD_BYTES + len;
  if (next > size) return 'torn';
  if (len > MAX_RECORD_BYTES) return { error: `record length ${len} at byte ${pos} is not plausible` };
  const body = await readExactly(fh, len, pos + HEAD_BYTES);
  if (zlib.crc32(body) !== head.readUInt32LE(4)) {
    // The last record of the file with a bad checksum: its append was torn (the length reached
    // the disk, the body not all of it). With data after it, the file is damaged.
    return next === size ? 'torn' : { error: `bad checksum in the record at byte ${pos}` };
  }
  try {
    return { rec: decodeBody(body), next };
  } catch (err) {
    return { error: `record at byte ${pos} does not parse: ${(err as Error).message}` };
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

/** Parses records from a buffer until the end or the first torn/corrupt one (tests, tools). */
export function* readRecords(buf: Buffer): Generator<SpoolRecord> {
  let o = 0;
  while (o + HEAD_BYTES <= buf.length) {
    const len = buf.readUInt32LE(o);
    if (o + HEAD_BYTES + len > buf.length) return;
    const body = buf.subarray(o + HEAD_BYTES, o + HEAD_BYTES + len);
    if (zlib.crc32(body) !== buf.readUInt32LE(o + 4)) return;
    yield decodeBody(body);
    o += HEAD_BYTES + len;
  }
}
