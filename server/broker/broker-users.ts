/**
 * Who may use the embedded broker and for what (MQTT 3.1.1 §5.4.1 authentication of clients,
 * §5.4.2 authorization; the protocol leaves both to the server).
 *
 * Two kinds of users, both kept in `<dataDir>/broker/` (folder 700, files 600):
 *
 * - `credentials.json`: the product's own two users, created with random passwords at the
 *   first start (`ensureBrokerCredentials`). `ingest` may subscribe to anything and publish
 *   nothing; `simulator` may publish only below the demo plant's topic prefix and subscribe to
 *   nothing. Their passwords are kept in clear because the launcher hands them on (ingest
 *   through its MQTT source row, the simulator through a password file).
 * - `users.json`: users added for a plant's own publisher with `npm run broker-user -- add …`,
 *   each with an scrypt hash (node:crypto; N = 2^14, r = 8, p = 1, the parameters RFC 7914 §2
 *   gives for interactive use) and its publish/subscribe topic filters. The broker re-reads the
 *   file when it changes, so adding a user needs no restart.
 *
 * Anyone else (no user name, a wrong password) gets CONNACK return code 4, "bad user name or
 * password" (§3.2.2.3); a PUBLISH or SUBSCRIBE outside a user's filters closes its connection
 * (aedes' authorizePublish error; §3.3.5 lets a server drop such a message, and 3.1.1 has no
 * negative PUBACK) or is answered with SUBACK 0x80, failure (§3.9.3).
 */
import { randomBytes, scryptSync, timingSafeEqual } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { z } from 'zod';

export const INGEST_USER = 'ingest';
export const SIMULATOR_USER = 'simulator';

/** scrypt parameters (RFC 7914 §2, interactive logins) and key length. */
const SCRYPT = { N: 1 << 14, r: 8, p: 1 } as const;
const KEY_BYTES = 32;

const topicFilter = z
  .string()
  .min(1)
  .max(512)
  .refine((f) => f.split('/').every((lvl, i, all) => (lvl === '#' ? i === all.length - 1 : !lvl.includes('#') && (lvl === '+' || !lvl.includes('+')))), 'not a valid MQTT topic filter (§4.7.1)');

const userName = z.string().regex(/^[A-Za-z0-9_.-]{1,64}$/, 'letters, digits, "_", "." and "-" only, at most 64');

const builtInUser = z.object({ password: z.string().min(16), publish: z.array(topicFilter), subscribe: z.array(topicFilter) });
const credentialsFile = z.object({ ingest: builtInUser, simulator: builtInUser });
export type BrokerCredentials = z.infer<typeof credentialsFile>;

const storedUser = z.object({
  name: userName,
  salt: z.string().min(1),
  hash: z.string().min(1),
  publish: z.array(topicFilter),
  subscribe: z.array(topicFilter),
  created: z.string(),
});
const usersFile = z.object({ users: z.array(storedUser) });
export type StoredBrokerUser = z.infer<typeof storedUser>;

export function brokerDir(dataDir: string): string {
  return path.join(dataDir, 'broker');
}

function ensureDir(dataDir: string): string {
  const dir = brokerDir(dataDir);
  fs.mkdirSync(dir, { recursive: true, mode: 0o700 });
  fs.chmodSync(dir, 0o700);
  return dir;
}

/** Writes a file readable by its owner only, atomically (a reader never sees half of it). */
function writePrivate(file: string, text: string): void {
  const tmp = `${file}.${process.pid}.tmp`;
  fs.writeFileSync(tmp, text, { mode: 0o600 });
  fs.renameSync(tmp, file);
}

/**
 * The product's two broker users, created at the first start. `simulatorPublish` are the topic
 * filters of the demo plant (its prefix and `/#`); a later start keeps the passwords and updates
 * the filters. Also writes `simulator.password` (600) for the simulator's `--mqtt-password-file`.
 */
export function ensureBrokerCredentials(dataDir: string, simulatorPublish: string[]): BrokerCredentials {
  const dir = ensureDir(dataDir);
  const file = path.join(dir, 'credentials.json');
  const existing = fs.existsSync(file) ? credentialsFile.safeParse(JSON.parse(fs.readFileSync(file, 'utf8'))) : null;
  const pw = () => randomBytes(24).toString('base64url');
  const creds: BrokerCredentials = {
    ingest: { password: existing?.success ? existing.data.ingest.password : pw(), publish: [], subscribe: ['#'] },
    simulator: { password: existing?.success ? existing.data.simulator.password : pw(), publish: simulatorPublish, subscribe: [] },
  };
  if (!existing?.success || JSON.stringify(existing.data) !== JSON.stringify(creds)) writePrivate(file, `${JSON.stringify(creds, null, 2)}\n`);
  fs.chmodSync(file, 0o600);
  const pwFile = simulatorPasswordFile(dataDir);
  if (!fs.existsSync(pwFile) || fs.readFileSync(pwFile, 'utf8') !== creds.simulator.password) writePrivate(pwFile, creds.simulator.password);
  return creds;
}

export function simulatorPasswordFile(dataDir: string): string {
  return path.join(brokerDir(dataDir), 'simulator.password');
}

function usersPath(dataDir: string): string {
  return path.join(brokerDir(dataDir), 'users.json');
}

export function readBrokerUsers(dataDir: string): StoredBrokerUser[] {
  const file = usersPath(dataDir);
  if (!fs.existsSync(file)) return [];
  const parsed = usersFile.safeParse(JSON.parse(fs.readFileSync(file, 'utf8')));
  if (!parsed.success) throw new Error(`${file} is not a broker user file: ${parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}`);
  return parsed.data.users;
}

function hashPassword(password: string, salt: Buffer): Buffer {
  return scryptSync(password, salt, KEY_BYTES, SCRYPT);
}

export const addUserInput = z.object({
  name: userName.refine((n) => n !== INGEST_USER && n !== SIMULATOR_USER, 'is a built-in user'),
  publish: z.array(topicFilter),
  subscribe: z.array(topicFilter),
});

/** Adds (or replaces) a user; returns its generated password, shown once. */
export function addBrokerUser(dataDir: string, input: z.input<typeof addUserInput>): string {
  const u = addUserInput.parse(input);
  ensureDir(dataDir);
  const password = randomBytes(24).toString('base64url');
  const salt = randomBytes(16);
  const users = readBrokerUsers(dataDir).filter((x) => x.name !== u.name);
  users.push({ ...u, salt: salt.toString('base64'), hash: hashPassword(password, salt).toString('base64'), created: new Date().toISOString() });
  writePrivate(usersPath(dataDir), `${JSON.stringify({ users }, null, 2)}\n`);
  return password;
}

export function removeBrokerUser(dataDir: string, name: string): boolean {
  const users = readBrokerUsers(dataDir);
  const kept = users.filter((x) => x.name !== name);
  if (kept.length === users.length) return false;
  writePrivate(usersPath(dataDir), `${JSON.stringify({ users: kept }, null, 2)}\n`);
  return true;
}

/** Whether `topic` (a PUBLISH topic name, no wildcards) matches `filter` (§4.7). */
export function topicMatches(filter: string, topic: string): boolean {
  // §4.7.2: a filter starting with a wildcard does not match topics starting with "$".
  if (topic.startsWith('$') && (filter.startsWith('#') || filter.startsWith('+'))) return false;
  const f = filter.split('/');
  const t = topic.split('/');
  for (let i = 0; i < f.length; i++) {
    if (f[i] === '#') return true;
    if (i >= t.length) return false;
    if (f[i] !== '+' && f[i] !== t[i]) return false;
  }
  return f.length === t.length;
}

/** Whether every topic a subscription `filter` can match is also matched by the allowed `allowed` filter. */
export function filterCovered(allowed: string, filter: string): boolean {
  const a = allowed.split('/');
  const f = filter.split('/');
  for (let i = 0; i < a.length; i++) {
    if (a[i] === '#') return !(allowed.startsWith('#') && filter.startsWith('$'));
    if (i >= f.length) return false;
    if (f[i] === '#') return false;
    if (a[i] === '+') continue;
    if (a[i] !== f[i]) return false;
  }
  return a.length === f.length;
}

interface Grant {
  publish: string[];
  subscribe: string[];
}

/** What aedes needs: the documented `authenticate`, `authorizePublish` and `authorizeSubscribe` handlers. */
export interface BrokerAuth {
  authenticate(client: { id: string }, username: string | undefined, password: Buffer | undefined, done: (err: (Error & { returnCode?: number }) | null, ok: boolean | null) => void): void;
  authorizePublish(client: { id: string } | null, packet: { topic: string }, done: (err?: Error | null) => void): void;
  authorizeSubscribe(client: { id: string }, sub: { topic: string; qos: number }, done: (err: Error | null, sub?: { topic: string; qos: number } | null) => void): void;
}

function same(a: string, b: string): boolean {
  const x = Buffer.from(a);
  const y = Buffer.from(b);
  return x.length === y.length && timingSafeEqual(x, y);
}

/**
 * The ACL of a broker serving `dataDir`: built-in users from credentials.json (read once),
 * added users from users.json (re-read when its modification time changes).
 */
export function createBrokerAuth(dataDir: string): BrokerAuth {
  const credsFile = path.join(brokerDir(dataDir), 'credentials.json');
  const creds = credentialsFile.parse(JSON.parse(fs.readFileSync(credsFile, 'utf8')));
  let added: StoredBrokerUser[] = [];
  let addedMtime = -1;
  const loadAdded = () => {
    const file = usersPath(dataDir);
    const m = fs.existsSync(file) ? fs.statSync(file).mtimeMs : 0;
    if (m !== addedMtime) {
      added = m ? readBrokerUsers(dataDir) : [];
      addedMtime = m;
    }
  };
  loadAdded();
  /** Client id → what its user may do, set when it authenticated. */
  const grants = new WeakMap<object, Grant>();
  const refuse = () => Object.assign(new Error('bad user name or password'), { returnCode: 4 });
  return {
    authenticate(client, username, password, done) {
      const pw = password?.toString('utf8') ?? '';
      if (!username || !pw) return done(refuse(), false);
      let grant: Grant | null = null;
      if (username === INGEST_USER || username === SIMULATOR_USER) {
        const u = creds[username];
        if (same(pw, u.password)) grant = u;
      } else {
        try {
          loadAdded();
        } catch {
          // A broken users.json admits none of its users; the built-in ones keep working.
          added = [];
        }
        const u = added.find((x) => x.name === username);
        if (u && timingSafeEqual(hashPassword(pw, Buffer.from(u.salt, 'base64')), Buffer.from(u.hash, 'base64'))) grant = u;
      }
      if (!grant) return done(refuse(), false);
      grants.set(client, { publish: grant.publish, subscribe: grant.subscribe });
      done(null, true);
    },
    authorizePublish(client, packet, done) {
      // client is null only for a will aedes publishes on behalf of a gone client: it was authorized when set.
      if (!client) return done(null);
      const g = grants.get(client);
      if (packet.topic.startsWith('$SYS') || !g?.publish.some((f) => topicMatches(f, packet.topic))) {
        return done(new Error(`not authorized to publish to ${packet.topic}`));
      }
      done(null);
    },
    authorizeSubscribe(client, sub, done) {
      const g = grants.get(client);
      done(null, g?.subscribe.some((f) => filterCovered(f, sub.topic)) ? sub : null);
    },
  };
}
