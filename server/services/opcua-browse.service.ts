import fs from 'node:fs';
import path from 'node:path';
import type { BrowseNode, ConnectionTestOut } from '../../shared/contracts/wiring.ts';
import { opcuaOptionsInput } from '../../shared/contracts/wiring.ts';
import { HttpError, NotFoundError, ValidationError } from '../http/errors.ts';

/** What a session needs from a `sources` row. */
export interface OpcuaEndpoint {
  url: string;
  username: string | null;
  secret: string | null;
  options: unknown;
}

/** Connect + CreateSession + ActivateSession must finish within this [ms]. */
export const OPCUA_TEST_TIMEOUT_MS = 8_000;
/** Children listed per browse at most (continuation points are followed up to this). */
export const BROWSE_MAX_CHILDREN = 5_000;
/** ObjectsFolder (OPC 10000-5 §8.2.4): where a plant's variables live. */
export const OBJECTS_FOLDER = 'ns=0;i=85';

/** The server's own OPC UA client PKI, under the data folder (never the home folder: STACK.md). */
export function serverPkiDir(dataDir: string): string {
  return path.join(dataDir, 'pki', 'server-client');
}

// node-opcua is large (≈ 100 MB once loaded): the API loads it on the first OPC UA request only.
type Opcua = typeof import('node-opcua');
let mod: Promise<Opcua> | undefined;
const opcua = () => (mod ??= import('node-opcua'));

// One certificate manager per PKI folder per process: node-opcua locks the folder while it initialises.
const managers = new Map<string, import('node-opcua').OPCUACertificateManager>();

class Timeout extends Error {}

function describe(err: unknown): string {
  const m = (err as Error)?.message ?? String(err);
  // node-opcua messages can run over many lines with internal detail; the first line says it.
  return m.split('\n')[0]!.slice(0, 300);
}

/**
 * Opens a short-lived session (secure channel per the source's securityMode/securityPolicy,
 * OPC 10000-4 §5.5; CreateSession + ActivateSession, §5.6.2–3), runs `fn`, and always closes
 * session and channel. The whole exchange is bounded by `timeoutMs`; no reconnect attempts.
 */
async function withSession<T>(ep: OpcuaEndpoint, pkiDir: string, timeoutMs: number, fn: (session: import('node-opcua').ClientSession, m: Opcua) => Promise<T>): Promise<T> {
  const m = await opcua();
  const parsed = opcuaOptionsInput.safeParse(ep.options ?? {});
  const opts = parsed.success ? parsed.data : {};
  const acceptUnknown = opts.acceptUnknownServerCertificate ?? false;
  const key = `${pkiDir}|${acceptUnknown}`;
  let cm = managers.get(key);
  if (!cm) {
    fs.mkdirSync(pkiDir, { recursive: true });
    cm = new m.OPCUACertificateManager({ rootFolder: pkiDir, automaticallyAcceptUnknownCertificate: acceptUnknown });
    managers.set(key, cm);
  }
  const client = m.OPCUAClient.create({
    applicationName: 'Flocstream server',
    applicationUri: 'urn:flocstream:server',
    clientName: 'flocstream-server',
    endpointMustExist: false,
    securityMode: m.MessageSecurityMode[opts.securityMode ?? 'None'],
    securityPolicy: m.SecurityPolicy[opts.securityPolicy ?? 'None'],
    clientCertificateManager: cm,
    certificateFile: path.join(pkiDir, 'own', 'certs', 'client_certificate.pem'),
    privateKeyFile: path.join(pkiDir, 'own', 'private', 'private_key.pem'),
    requestedSessionTimeout: 30_000,
    keepSessionAlive: false,
    // One attempt: a connection test or a browse should fail fast, not retry in the background.
    connectionStrategy: { maxRetry: 0, initialDelay: 100, maxDelay: 200 },
  });
  let timer: NodeJS.Timeout | undefined;
  let session: import('node-opcua').ClientSession | undefined;
  const work = (async () => {
    await client.connect(ep.url);
    session = await client.createSession(ep.username ? { type: m.UserTokenType.UserName, userName: ep.username, password: ep.secret ?? '' } : { type: m.UserTokenType.Anonymous });
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

/** "Test connection" for an OPC UA source: connect and open a session; never throws for a failure of the endpoint. */
export async function testOpcua(ep: OpcuaEndpoint, pkiDir: string, timeoutMs = OPCUA_TEST_TIMEOUT_MS): Promise<ConnectionTestOut> {
  const t0 = performance.now();
  try {
    const details = await withSession(ep, pkiDir, timeoutMs, async (s) => ({ sessionName: s.name }));
    return { ok: true, latency_ms: Math.round(performance.now() - t0), details };
  } catch (err) {
    return { ok: false, latency_ms: Math.round(performance.now() - t0), error: describe(err) };
  }
}

/**
 * Children of one node: a Browse (OPC 10000-4 §5.8.2) of forward HierarchicalReferences with
 * subtypes, continuation points followed by BrowseNext (§5.8.3) and released at the end; a
 * second Browse of all children answers `hasChildren`, and a Read of the DataType attribute
 * (OPC 10000-3 §5.6.2) names the type of each Variable.
 */
export async function browseChildren(ep: OpcuaEndpoint, pkiDir: string, nodeIdText: string | undefined, timeoutMs = OPCUA_TEST_TIMEOUT_MS): Promise<{ nodeId: string; children: BrowseNode[] }> {
  const m = await opcua();
  let nodeId;
  try {
    nodeId = m.resolveNodeId(nodeIdText ?? OBJECTS_FOLDER);
  } catch {
    throw new ValidationError({ nodeId: ['not a NodeId; e.g. ns=0;i=85 or ns=2;s=Plant.Basin1'] });
  }
  const hierarchical = m.resolveNodeId('HierarchicalReferences');
  const desc = (n: import('node-opcua').NodeId, resultMask: number) => ({ nodeId: n, browseDirection: m.BrowseDirection.Forward, referenceTypeId: hierarchical, includeSubtypes: true, nodeClassMask: 0, resultMask });
  try {
    return await withSession(ep, pkiDir, timeoutMs, async (session) => {
      const first = await session.browse(desc(nodeId, 0x3f));
      if (first.statusCode.value === m.StatusCodes.BadNodeIdUnknown.value || first.statusCode.value === m.StatusCodes.BadNodeIdInvalid.value) throw new NotFoundError(`the server has no node ${nodeId.toString()}`);
      if (first.statusCode.isNotGood()) throw new HttpError(502, 'upstream_error', `the server refused the browse: ${first.statusCode.name}`);
      const refs = [...(first.references ?? [])];
      let cp: Buffer | null | undefined = first.continuationPoint;
      while (cp && cp.length && refs.length < BROWSE_MAX_CHILDREN) {
        const [next]: import('node-opcua').BrowseResult[] = await session.browseNext([cp], false);
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
        const v = types[k]?.value?.value as import('node-opcua').NodeId | undefined;
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
    if (err instanceof HttpError) throw err;
    throw new HttpError(502, 'upstream_unreachable', `could not browse ${ep.url}: ${describe(err)}`);
  }
}
