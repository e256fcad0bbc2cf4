/**
 * Flocstream's one OPC UA client: its application instance certificate, sessions, and browse.
 * Used by ingest's connector (long-lived subscriptions) and by the API's connection test and
 * browse (short sessions), so every Flocstream process on every host presents the same
 * certificate and an integrator trusts one client in the server's PKI.
 *
 * node-opcua is large (≈ 100 MB resident once loaded), so this module loads it on first use
 * only; importing it costs nothing until an OPC UA source is used.
 */
import { randomUUID, X509Certificate } from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { BrowseResult, ClientSession, NodeId, OPCUACertificateManager, OPCUAClient, ReferenceDescription, UserIdentityInfo } from 'node-opcua';
import type pg from 'pg';
import { opcuaSourceOptions, type OpcuaSourceOptions } from './opcua-options.ts';

type Opcua = typeof import('node-opcua');
let mod: Promise<Opcua> | undefined;
/** node-opcua, loaded on first use. */
export const loadOpcua = (): Promise<Opcua> => (mod ??= import('node-opcua'));

/** The application URI in the certificate and in CreateSession must be the same (OPC 10000-4 §5.6.2). */
export const CLIENT_APPLICATION_URI = 'urn:flocstream:opcua-client';
export const CLIENT_APPLICATION_NAME = 'Flocstream';

/** The client PKI of this host, under the data folder (never the home folder). */
export function clientPkiDir(dataDir: string): string {
  return path.join(dataDir, 'pki', 'opcua-client');
}

/** What a session needs from a `sources` row. */
export interface OpcuaEndpoint {
  url: string;
  username: string | null;
  secret: string | null;
  options: unknown;
}

export interface ClientIdentity {
  pkiDir: string;
  certificateFile: string;
  privateKeyFile: string;
  /** SHA-1 of the DER certificate, lower-case hex: the thumbprint a server's PKI lists (OPC 10000-4 §7.2). */
  thumbprint: string;
}

/** The source's options with defaults; invalid options fall back to the defaults (the connector reports them). */
export function parseOpcuaOptions(options: unknown): { opts: OpcuaSourceOptions; error: string | null } {
  const parsed = opcuaSourceOptions.safeParse(options ?? {});
  if (parsed.success) return { opts: parsed.data, error: null };
  return { opts: opcuaSourceOptions.parse({}), error: `invalid source options, using defaults: ${parsed.error.issues.map((i) => i.message).join('; ')}` };
}

export function thumbprintOf(certificatePem: string): string {
  return new X509Certificate(certificatePem).fingerprint.replaceAll(':', '').toLowerCase();
}

function writeIfChanged(file: string, text: string, mode: number): void {
  try {
    if (fs.readFileSync(file, 'utf8') === text) return;
  } catch {
    // not there yet
  }
  fs.mkdirSync(path.dirname(file), { recursive: true });
  const tmp = `${file}.${process.pid}.${randomUUID()}.tmp`;
  fs.writeFileSync(tmp, text, { mode });
  fs.renameSync(tmp, file);
}

/** A new self-signed client certificate and key, made in a scratch PKI folder that is removed after. */
async function generateIdentity(pkiDir: string): Promise<{ certificatePem: string; privateKeyPem: string }> {
  const m = await loadOpcua();
  const scratch = `${pkiDir}-new-${randomUUID()}`;
  const cm = new m.OPCUACertificateManager({ rootFolder: scratch });
  try {
    await cm.initialize();
    const certFile = path.join(scratch, 'own', 'certs', 'client_certificate.pem');
    await cm.createSelfSignedCertificate({
      applicationUri: CLIENT_APPLICATION_URI,
      subject: `/CN=${CLIENT_APPLICATION_NAME}/O=${CLIENT_APPLICATION_NAME}`,
      dns: [os.hostname()],
      startDate: new Date(),
      // Ten years, node-opcua's own default for a generated client certificate.
      validity: 3650,
      outputFile: certFile,
    });
    return { certificatePem: fs.readFileSync(certFile, 'utf8'), privateKeyPem: fs.readFileSync(cm.privateKey, 'utf8') };
  } finally {
    await cm.dispose().catch(() => {});
    fs.rmSync(scratch, { recursive: true, force: true });
  }
}

const identities = new Map<string, Promise<ClientIdentity>>();

/**
 * The client certificate every Flocstream process presents, kept in the database
 * (`opcua_client_identity`, one row) and copied into this host's PKI folder. The first process
 * that needs it creates it; when two race, the row that won is used by both.
 */
export function clientIdentity(db: pg.Pool, dataDir: string): Promise<ClientIdentity> {
  const pkiDir = clientPkiDir(dataDir);
  let p = identities.get(pkiDir);
  if (!p) {
    p = (async () => {
      const read = async () =>
        (await db.query<{ certificate_pem: string; private_key_pem: string }>(`SELECT certificate_pem, private_key_pem FROM opcua_client_identity WHERE id = 1`)).rows[0];
      let row = await read();
      if (!row) {
        const made = await generateIdentity(pkiDir);
        await db.query(`INSERT INTO opcua_client_identity (id, application_uri, certificate_pem, private_key_pem) VALUES (1, $1, $2, $3) ON CONFLICT (id) DO NOTHING`, [
          CLIENT_APPLICATION_URI,
          made.certificatePem,
          made.privateKeyPem,
        ]);
        row = await read();
        if (!row) throw new Error('the OPC UA client certificate could not be stored');
      }
      const certificateFile = path.join(pkiDir, 'own', 'certs', 'client_certificate.pem');
      const privateKeyFile = path.join(pkiDir, 'own', 'private', 'private_key.pem');
      // Written before the certificate manager first opens the folder, so it never makes a key of its own.
      writeIfChanged(certificateFile, row.certificate_pem, 0o644);
      writeIfChanged(privateKeyFile, row.private_key_pem, 0o600);
      return { pkiDir, certificateFile, privateKeyFile, thumbprint: thumbprintOf(row.certificate_pem) };
    })();
    identities.set(pkiDir, p);
    // A database that was down must not be remembered as the answer.
    p.catch(() => identities.delete(pkiDir));
  }
  return p;
}

/** One certificate manager per PKI folder and trust setting per process: node-opcua locks the folder while it initialises. */
const managers = new Map<string, OPCUACertificateManager>();
async function certificateManager(pkiDir: string, acceptUnknown: boolean): Promise<OPCUACertificateManager> {
  const key = `${pkiDir}|${acceptUnknown}`;
  let cm = managers.get(key);
  if (!cm) {
    const m = await loadOpcua();
    fs.mkdirSync(pkiDir, { recursive: true });
    // An unknown server certificate goes to <pki>/rejected for an integrator to move to trusted/.
    cm = new m.OPCUACertificateManager({ rootFolder: pkiDir, automaticallyAcceptUnknownCertificate: acceptUnknown });
    managers.set(key, cm);
  }
  return cm;
}

export interface ClientPurpose {
  /** Shown in the server's session list. */
  clientName: string;
  /**
   * `subscribe`: keep the session alive and let node-opcua re-establish the secure channel with
   * back-off, then reactivate the session or transfer its subscriptions (OPC 10000-4 §6.7).
   * `probe`: one attempt, no retries (a connection test or a browse must fail fast).
   */
  mode: 'subscribe' | 'probe';
}

export async function createClient(identity: ClientIdentity, opts: OpcuaSourceOptions, purpose: ClientPurpose): Promise<OPCUAClient> {
  const m = await loadOpcua();
  const subscribe = purpose.mode === 'subscribe';
  return m.OPCUAClient.create({
    applicationName: CLIENT_APPLICATION_NAME,
    applicationUri: CLIENT_APPLICATION_URI,
    clientName: purpose.clientName,
    endpointMustExist: false,
    securityMode: m.MessageSecurityMode[opts.securityMode],
    securityPolicy: m.SecurityPolicy[opts.securityPolicy],
    clientCertificateManager: await certificateManager(identity.pkiDir, opts.acceptUnknownServerCertificate),
    certificateFile: identity.certificateFile,
    privateKeyFile: identity.privateKeyFile,
    keepSessionAlive: subscribe,
    requestedSessionTimeout: subscribe ? 60_000 : 30_000,
    connectionStrategy: subscribe ? { initialDelay: 1_000, maxDelay: 30_000, maxRetry: 1_000_000, randomisationFactor: 0.2 } : { maxRetry: 0, initialDelay: 100, maxDelay: 200 },
  });
}

export async function userIdentity(source: Pick<OpcuaEndpoint, 'username' | 'secret'>): Promise<UserIdentityInfo> {
  const m = await loadOpcua();
  return source.username ? { type: m.UserTokenType.UserName, userName: source.username, password: source.secret ?? '' } : { type: m.UserTokenType.Anonymous };
}

/** The first line of a node-opcua error (its messages run over many lines of internal detail). */
export function describeOpcuaError(err: unknown): string {
  const msg = (err as Error)?.message ?? String(err);
  return msg.split('\n')[0]!.slice(0, 300);
}

class Timeout extends Error {}

/**
 * Opens a short-lived session (secure channel per the source's securityMode/securityPolicy,
 * OPC 10000-4 §5.5; CreateSession + ActivateSession, §5.6.2–3), runs `fn`, and always closes
 * session and channel. The whole exchange is bounded by `timeoutMs`; no reconnect attempts.
 */
export async function withSession<T>(ep: OpcuaEndpoint, identity: ClientIdentity, timeoutMs: number, fn: (session: ClientSession, m: Opcua) => Promise<T>): Promise<T> {
  const m = await loadOpcua();
  const client = await createClient(identity, parseOpcuaOptions(ep.options).opts, { clientName: 'flocstream-probe', mode: 'probe' });
  let timer: NodeJS.Timeout | undefined;
  let session: ClientSession | undefined;
  const work = (async () => {
    await client.connect(ep.url);
    session = await client.createSession(await userIdentity(ep));
    return fn(session, m);
  })();
  work.catch(() => {});
  try {
    return await Promise.race([work, new Promise<never>((_, reject) => (timer = setTimeout(() => reject(new Timeout(`no answer within ${timeoutMs / 1000} s`)), timeoutMs)))]);
  } finally {
    clearTimeout(timer);
    await session?.close().catch(() => {});
    await client.disconnect().catch(() => {});
  }
}

/** "Test connection": connect and open a session; never throws for a failure of the endpoint. */
export async function testEndpoint(ep: OpcuaEndpoint, identity: ClientIdentity, timeoutMs: number): Promise<{ ok: boolean; latency_ms: number; details?: Record<string, unknown>; error?: string }> {
  const t0 = performance.now();
  try {
    const details = await withSession(ep, identity, timeoutMs, async (s) => ({ sessionName: s.name, clientCertificateThumbprint: identity.thumbprint }));
    return { ok: true, latency_ms: Math.round(performance.now() - t0), details };
  } catch (err) {
    return { ok: false, latency_ms: Math.round(performance.now() - t0), error: describeOpcuaError(err) };
  }
}

/** Children listed per browse at most (continuation points are followed up to this). */
export const BROWSE_MAX_CHILDREN = 5_000;
/** ObjectsFolder (OPC 10000-5 §8.2.4): where a plant's variables live. */
export const OBJECTS_FOLDER = 'ns=0;i=85';

export interface BrowsedNode {
  nodeId: string;
  browseName: string;
  displayName: string;
  nodeClass: string;
  hasChildren: boolean;
  dataType?: string;
}

/** Why a browse failed; the API maps `kind` to its HTTP answer. */
export class OpcuaBrowseError extends Error {
  constructor(
    readonly kind: 'bad_node_id' | 'unknown_node' | 'refused' | 'unreachable',
    message: string,
  ) {
    super(message);
  }
}

/**
 * Children of one node: a Browse (OPC 10000-4 §5.8.2) of forward HierarchicalReferences with
 * subtypes, continuation points followed by BrowseNext (§5.8.3) and released at the end; a
 * second Browse of all children answers `hasChildren`, and a Read of the DataType attribute
 * (OPC 10000-3 §5.6.2) names the type of each Variable.
 */
export async function browseChildren(ep: OpcuaEndpoint, identity: ClientIdentity, nodeIdText: string | undefined, timeoutMs: number): Promise<{ nodeId: string; children: BrowsedNode[] }> {
  const m = await loadOpcua();
  let nodeId: NodeId;
  try {
    nodeId = m.resolveNodeId(nodeIdText ?? OBJECTS_FOLDER);
  } catch {
    throw new OpcuaBrowseError('bad_node_id', 'not a NodeId; e.g. ns=0;i=85 or ns=2;s=Plant.Basin1');
  }
  const hierarchical = m.resolveNodeId('HierarchicalReferences');
  const desc = (n: NodeId, resultMask: number) => ({ nodeId: n, browseDirection: m.BrowseDirection.Forward, referenceTypeId: hierarchical, includeSubtypes: true, nodeClassMask: 0, resultMask });
  try {
    return await withSession(ep, identity, timeoutMs, async (session) => {
      const first = await session.browse(desc(nodeId, 0x3f));
      if (first.statusCode.value === m.StatusCodes.BadNodeIdUnknown.value || first.statusCode.value === m.StatusCodes.BadNodeIdInvalid.value) {
        throw new OpcuaBrowseError('unknown_node', `the server has no node ${nodeId.toString()}`);
      }
      if (first.statusCode.isNotGood()) throw new OpcuaBrowseError('refused', `the server refused the browse: ${first.statusCode.name}`);
      const refs: ReferenceDescription[] = [...(first.references ?? [])];
      let cp: Buffer | null | undefined = first.continuationPoint;
      while (cp && cp.length && refs.length < BROWSE_MAX_CHILDREN) {
        const [next]: BrowseResult[] = await session.browseNext([cp], false);
        refs.push(...(next?.references ?? []));
        cp = next?.continuationPoint ?? null;
      }
      if (cp && cp.length) await session.browseNext([cp], true).catch(() => {});
      const kept = refs.slice(0, BROWSE_MAX_CHILDREN);
      const below = kept.length ? await session.browse(kept.map((r) => ({ ...desc(r.nodeId, 0), requestedMaxReferencesPerNode: 1 }))) : [];
      const leftover = below.map((b) => b.continuationPoint).filter((c): c is Buffer => !!c && c.length > 0);
      if (leftover.length) await session.browseNext(leftover, true).catch(() => {});
      const vars = kept.map((r, i) => ({ r, i })).filter(({ r }) => r.nodeClass === m.NodeClass.Variable);
      const types = vars.length ? await session.read(vars.map(({ r }) => ({ nodeId: r.nodeId, attributeId: m.AttributeIds.DataType }))) : [];
      const typeOf = new Map<number, string>();
      vars.forEach(({ i }, k) => {
        const v = types[k]?.value?.value as NodeId | undefined;
        if (!v || types[k]!.statusCode.isNotGood()) return;
        const std = v.namespace === 0 && typeof v.value === 'number' ? (m.DataType as unknown as Record<number, string>)[v.value] : undefined;
        typeOf.set(i, std ?? v.toString());
      });
      return {
        nodeId: nodeId.toString(),
        children: kept.map((r, i) => ({
          nodeId: r.nodeId.toString(),
          browseName: r.browseName.toString(),
          displayName: r.displayName?.text ?? r.browseName.name ?? '',
          nodeClass: m.NodeClass[r.nodeClass] ?? String(r.nodeClass),
          hasChildren: (below[i]?.references?.length ?? 0) > 0 || !!below[i]?.continuationPoint?.length,
          ...(typeOf.has(i) ? { dataType: typeOf.get(i)! } : {}),
        })),
      };
    });
  } catch (err) {
    if (err instanceof OpcuaBrowseError) throw err;
    throw new OpcuaBrowseError('unreachable', `could not browse ${ep.url}: ${describeOpcuaError(err)}`);
  }
}
