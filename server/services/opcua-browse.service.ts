import type { BrowseNode, ConnectionTestOut } from '../../shared/contracts/wiring.ts';
import type pg from 'pg';
import { HttpError, NotFoundError, ValidationError } from '../http/errors.ts';
import type { OpcuaEndpoint } from '../../ingest/opcua/opcua-client.ts';

export type { OpcuaEndpoint };

/** Connect + CreateSession + ActivateSession must finish within this [ms]. */
export const OPCUA_TEST_TIMEOUT_MS = 8_000;

// The OPC UA client (ingest/opcua/opcua-client.ts, shared with ingest so both present one
// certificate) loads node-opcua (≈ 100 MB) on first use; the API imports it on the first OPC UA
// request only.
const client = () => import('../../ingest/opcua/opcua-client.ts');

/**
 * The wiring view's OPC UA connection test and browse, through the client ingest uses: the
 * same application certificate (kept in the database, copied into `<dataDir>/pki/opcua-client`),
 * so an integrator trusts one Flocstream client on the server.
 */
export interface OpcuaBrowseDeps {
  /** Where the one client certificate is kept (table opcua_client_identity). */
  pool: pg.Pool;
  /** The data folder; the certificate is copied under `<dataDir>/pki/opcua-client`. */
  dataDir: string;
  timeoutMs?: number;
}

export function createOpcuaBrowseService({ pool, dataDir, timeoutMs = OPCUA_TEST_TIMEOUT_MS }: OpcuaBrowseDeps) {
  const identity = async () => (await client()).clientIdentity(pool, dataDir);
  return {
    /** "Test connection": connect and open a session; never throws for a failure of the endpoint. */
    async test(ep: OpcuaEndpoint): Promise<ConnectionTestOut> {
      const c = await client();
      let id;
      try {
        id = await identity();
      } catch (err) {
        return { ok: false, latency_ms: 0, error: `no OPC UA client certificate: ${c.describeOpcuaError(err)}` };
      }
      return c.testEndpoint(ep, id, timeoutMs);
    },

    /** Children of one node (ObjectsFolder when `nodeId` is not given), mapped to HTTP errors. */
    async browse(ep: OpcuaEndpoint, nodeId: string | undefined): Promise<{ nodeId: string; children: BrowseNode[] }> {
      const c = await client();
      try {
        return await c.browseChildren(ep, await identity(), nodeId, timeoutMs);
      } catch (err) {
        if (!(err instanceof c.OpcuaBrowseError)) throw new HttpError(502, 'upstream_unreachable', `could not browse ${ep.url}: ${c.describeOpcuaError(err)}`);
        if (err.kind === 'bad_node_id') throw new ValidationError({ nodeId: [err.message] });
        if (err.kind === 'unknown_node') throw new NotFoundError(err.message);
        if (err.kind === 'refused') throw new HttpError(502, 'upstream_error', err.message);
        throw new HttpError(502, 'upstream_unreachable', err.message);
      }
    },
  };
}
export type OpcuaBrowseService = ReturnType<typeof createOpcuaBrowseService>;
