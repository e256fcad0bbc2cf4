import fs from 'node:fs';
import fsp from 'node:fs/promises';
import os from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it, vi } from 'vitest';
import type { Sample } from '../../../ingest/pipeline/types.ts';
import { Spool, type SpoolRecord } from '../../../ingest/sink/spool.ts';

const dirs: string[] = [];
afterEach(() => {
  vi.restoreAllMocks();
  for (const d of dirs.splice(0)) fs.rmSync(d, { recursive: true, force: true });
});

function tmp(): string {
  const d = fs.mkdtempSync(path.join(os.tmpdir(), 'spool-safety-'));
  dirs.push(d);
  return d;
}

/** Record k: 10 samples of tag k, values k*10 … k*10+9. */
function record(k: number): SpoolRecord {
  const samples: Sample[] = Array.from({ length: 10 }, (_, i) => ({ tagId: k, ts: 1_700_000_000_000 + i, value: k * 10 + i, quality: 0 }));
  return { samples, deadLetters: [] };
}

const spoolFiles = (dir: string) => fs.readdirSync(dir).filter((f) => f.endsWith('.spool')).sort();

/** Replays everything, collecting each record's tag in order. */
async function replayAll(s: Spool): Promise<number[]> {
  const seen: number[] = [];
  await s.replay(async (recs) => {
    for (const r of recs) seen.push(r.samples[0]!.tagId);
  }, 1); // one record per apply: record by record
  return seen;
}

describe('spool rotation and streamed replay', () => {
  it('rotates at the file size, replays every file record by record in order without readFile, and ends a file at a torn tail', async () => {
    const dir = tmp();
    // One record of 10 samples is 232–240 bytes; 1 000 bytes → a new file after every 4th record.
    const s = await Spool.open(dir, { fileBytes: 1_000 });
    for (let k = 1; k <= 20; k++) await s.append(record(k));
    await s.close();
    const files = spoolFiles(dir);
    expect(files.length).toBe(5);
    for (const f of files.slice(0, -1)) expect(fs.statSync(path.join(dir, f)).size).toBeGreaterThanOrEqual(1_000);
    // A crash mid-append leaves a record cut short at the end of the last file: the length says
    // 200 bytes, 5 follow. It was never acknowledged (fsync had not returned).
    fs.appendFileSync(path.join(dir, files.at(-1)!), Buffer.from([200, 0, 0, 0, 9, 9, 9, 9, 1, 2, 3, 4, 5]));
    const readFile = vi.spyOn(fsp, 'readFile');
    const again = await Spool.open(dir);
    expect(again.fileCount).toBe(5);
    expect(await replayAll(again)).toEqual(Array.from({ length: 20 }, (_, i) => i + 1));
    expect(readFile).not.toHaveBeenCalled();
    expect(spoolFiles(dir)).toEqual([]);
    expect(again.status()).toEqual({ dir, files: 0, bytes: 0, pendingBytes: 0, maxBytes: 2 * 1024 ** 3, unreadable: [], capReached: false });
  });

  it('keeps a file whose apply failed and resumes after the last applied record', async () => {
    const dir = tmp();
    const s = await Spool.open(dir);
    for (let k = 1; k <= 4; k++) await s.append(record(k));
    const seen: number[] = [];
    let fail = true;
    const apply = async (recs: SpoolRecord[]) => {
      if (recs[0]!.samples[0]!.tagId === 3 && fail) throw new Error('database went away');
      for (const r of recs) seen.push(r.samples[0]!.tagId);
    };
    await expect(s.replay(apply, 1)).rejects.toThrow('database went away');
    expect(spoolFiles(dir)).toHaveLength(1);
    expect(s.isEmpty).toBe(false);
    fail = false;
    await s.replay(apply, 1);
    expect(seen).toEqual([1, 2, 3, 4]);
    expect(spoolFiles(dir)).toEqual([]);
  });
});

describe('spool files that cannot be read', () => {
  it('an I/O error (a directory where a file should be) keeps that entry, reports it, and replays the others', async () => {
    const dir = tmp();
    const s = await Spool.open(dir, { fileBytes: 1 }); // one record per file
    for (let k = 1; k <= 3; k++) await s.append(record(k));
    await s.close();
    const [f1, f2, f3] = spoolFiles(dir);
    // Reading a directory fails with EISDIR, a real read(2) error that root cannot bypass either.
    fs.rmSync(path.join(dir, f2!));
    fs.mkdirSync(path.join(dir, f2!));
    const again = await Spool.open(dir);
    expect(await replayAll(again)).toEqual([1, 3]);
    expect(spoolFiles(dir)).toEqual([f2]);
    expect(fs.statSync(path.join(dir, f2!)).isDirectory()).toBe(true);
    const st = again.status();
    expect(st.unreadable).toHaveLength(1);
    expect(st.unreadable[0]!.file).toBe(path.join(dir, f2!));
    expect(st.unreadable[0]!.error).toMatch(/EISDIR|directory/i);
    // Nothing left to replay: new batches are not held behind the unreadable file.
    expect(again.isEmpty).toBe(true);
    expect(st.files).toBe(1);
    expect([f1, f3].every((f) => !fs.existsSync(path.join(dir, f!)))).toBe(true);
  });

  it('a damaged record with data after it: the records before it are applied, the file is kept and reported', async () => {
    const dir = tmp();
    const s = await Spool.open(dir);
    for (let k = 1; k <= 3; k++) await s.append(record(k));
    await s.close();
    const [f] = spoolFiles(dir);
    const file = path.join(dir, f!);
    const buf = fs.readFileSync(file);
    const second = 8 + buf.readUInt32LE(0);
    buf.writeUInt8(buf.readUInt8(second + 20) ^ 0xff, second + 20); // flip a byte inside record 2's body: its CRC-32 no longer matches
    fs.writeFileSync(file, buf);
    const again = await Spool.open(dir);
    expect(await replayAll(again)).toEqual([1]);
    expect(fs.existsSync(file)).toBe(true);
    const st = again.status();
    expect(st.unreadable).toEqual([{ file, bytes: buf.length, atByte: second, error: `bad checksum in the record at byte ${second}` }]);
  });
});

describe('an unreadable file dealt with by an operator', () => {
  it('is forgotten once moved out of the spool folder (its alarm clears), and kept while it is still there', async () => {
    const dir = tmp();
    const s = await Spool.open(dir, { fileBytes: 1 }); // one record per file
    for (let k = 1; k <= 2; k++) await s.append(record(k));
    await s.close();
    const [f1, f2] = spoolFiles(dir);
    fs.rmSync(path.join(dir, f1!));
    fs.mkdirSync(path.join(dir, f1!)); // EISDIR on read: unreadable
    const again = await Spool.open(dir, { maxBytes: 10_000 });
    expect(await replayAll(again)).toEqual([2]);
    expect(again.status()).toMatchObject({ files: 1, unreadable: [{ file: path.join(dir, f1!) }] });
    expect(await again.forgetRemoved()).toEqual([]);
    expect(again.status().unreadable).toHaveLength(1);
    fs.renameSync(path.join(dir, f1!), path.join(dir, 'moved-away'));
    expect(await again.forgetRemoved()).toEqual([path.join(dir, f1!)]);
    expect(again.status()).toMatchObject({ files: 0, bytes: 0, pendingBytes: 0, unreadable: [], capReached: false });
    expect(f2).toBeDefined();
  });
});

describe('spool size cap', () => {
  it('reports capReached once the files to replay hold the cap and refuses to append past it', async () => {
    const dir = tmp();
    // A record of 10 samples here is 232 bytes (8 of header, 224 of JSON): the cap is reached by the second.
    const s = await Spool.open(dir, { maxBytes: 400 });
    await s.append(record(1));
    expect(s.capReached).toBe(false);
    await s.append(record(2));
    expect(s.capReached).toBe(true);
    expect(s.status().capReached).toBe(true);
    await expect(s.append(record(3))).rejects.toThrow(/spool full/);
    expect(await replayAll(s)).toEqual([1, 2]);
    expect(s.capReached).toBe(false);
  });
});
