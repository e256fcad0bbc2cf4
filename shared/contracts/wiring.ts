import { z } from 'zod';
import { SIGNAL_KINDS, signalKind } from './plant-layout.ts';

/**
 * Wiring API (`/api/v1/plants/:plantId/sources|tags|signal-map`, `/api/v1/sources/:sourceId…`,
 * `/api/v1/ingest/status`): where the plant's data comes from (MQTT brokers, OPC UA endpoints),
 * which tag is which address with what scaling, and which tag is which process signal.
 *
 * Credentials are write-only: a source's password is stored server-side and every answer says
 * only `hasSecret`. Option objects are the ones the ingest process reads from `sources.options`
 * (it strips unknown keys, so only keys it honours are accepted here).
 *
 * The ingest status rows (`ingest_workers.status`) and the MQTT discovery rows are written by the
 * ingest process and read by the server; their shapes live here, validated on read.
 */

const id = (what: string) => z.coerce.number().int().positive().max(2_147_483_647).meta({ description: what });
const isoOut = (description: string) => z.string().meta({ description });

export const SOURCE_KINDS = ['mqtt', 'opcua'] as const;
export const sourceKind = z.enum(SOURCE_KINDS);
export type SourceKind = z.infer<typeof sourceKind>;

export const sourceParams = z.object({ sourceId: id('source id') }).strict();
export const tagIdParams = z.object({ tagId: id('tag id') }).strict();
export const mappingParams = z.object({ id: id('signal mapping id') }).strict();

// ---- URLs ----
const URL_SCHEMES: Record<SourceKind, readonly string[]> = { mqtt: ['mqtt:', 'mqtts:', 'ws:', 'wss:'], opcua: ['opc.tcp:'] };

/**
 * Why a URL does not fit a source kind, or null. MQTT: mqtt://, mqtts:// (TLS) or ws(s):// (MQTT
 * over WebSocket, MQTT 5.0 §6); OPC UA: opc.tcp://host[:port][/path] (OPC 10000-6 §7.2 UA TCP).
 * Credentials belong in username/password, never in the URL (it is shown in answers and logs).
 */
export function sourceUrlIssue(kind: SourceKind, url: string): string | null {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    return `not a URL; expected e.g. ${kind === 'mqtt' ? 'mqtt://broker.plant.local:1883' : 'opc.tcp://plc.plant.local:4840'}`;
  }
  if (!URL_SCHEMES[kind].includes(u.protocol)) return `a ${kind === 'mqtt' ? 'MQTT' : 'OPC UA'} source needs ${URL_SCHEMES[kind].map((s) => `${s}//`).join(', ')}; got ${u.protocol}//`;
  if (!u.hostname) return 'the URL has no host';
  if (u.username || u.password) return 'put credentials in username and password, not in the URL';
  if (u.port && (Number(u.port) < 1 || Number(u.port) > 65535)) return 'port out of range';
  return null;
}

// ---- options per kind ----
// One definition per kind, used by the API (input, strict: an unknown key is a mistake), by
// ingest (stored rows, unknown keys dropped and defaults applied) and by the API's connection
// test, which connects exactly as ingest does (ingest/mqtt/mqtt-connection.ts).

/** How an MQTT source's payloads are read (see `mqttOptionFields.payload`). */
export const MQTT_PAYLOAD_FORMATS = ['json', 'sparkplugB'] as const;
export type MqttPayloadFormat = (typeof MQTT_PAYLOAD_FORMATS)[number];

const mqttOptionFields = {
  topics: z.array(z.string().min(1).max(1024)).min(1).max(100).meta({ description: 'topic filters to subscribe to (default ["#"], which lets discovery see everything)' }),
  protocolVersion: z.union([z.literal(4), z.literal(5), z.literal('auto')]).meta({ description: '5 = MQTT 5.0, 4 = MQTT 3.1.1, auto (default) = 5.0 falling back to 3.1.1' }),
  clientId: z
    .string()
    .regex(/^[0-9A-Za-z_.-]{1,64}$/, 'letters, digits, _ . - only (MQTT 5.0 §3.1.3.1 guarantees 0-9a-zA-Z; 64 characters at most)')
    .meta({ description: 'client identifier of the ingest session (default flocstream-ingest-<source id>); keep it stable so the broker keeps the session' }),
  sharedGroup: z
    .string()
    .regex(/^[0-9A-Za-z_.-]{1,64}$/, 'letters, digits, _ . - only (a ShareName must not contain /, + or #, MQTT 5.0 §4.8.2)')
    .nullable()
    .meta({
      description:
        'MQTT 5 brokers: the shared subscription group every ingest worker joins ($share/<group>/<filter>, MQTT 5.0 §4.8.2), so the broker spreads the messages over the workers (default flocstream); null: one worker holds the source and the others stand by, as on MQTT 3.1.1 brokers',
    }),
  keepalive_s: z.number().int().min(5).max(3600).meta({ description: 'Keep Alive [s] (MQTT 5.0 §3.1.2.10)' }),
  tlsCa_pem: z
    .string()
    .max(65_536)
    .regex(/-----BEGIN CERTIFICATE-----/, 'a PEM certificate (-----BEGIN CERTIFICATE-----)')
    .meta({ description: 'PEM certificate(s) of the CA that signed the broker’s certificate, for mqtts:// and wss:// when it is not a public CA' }),
  payload: z.enum(MQTT_PAYLOAD_FORMATS).meta({
    description: 'json (default): Flocstream JSON, and Sparkplug B on topics under spBv1.0/ (detected); sparkplugB: Sparkplug B only (Eclipse Sparkplug 3.0), other topics ignored',
  }),
  requestRebirth: z.boolean().meta({
    description:
      'Sparkplug B only; default false. When true, ingest may publish the standard rebirth command (NCMD Node Control/Rebirth = true) to an edge node whose metric aliases it does not know, at most once per node per minute — the only message ingest can ever publish. A rebirth makes the edge node resend its births; ask the plant’s control-system owner before enabling it.',
  }),
};

/** `sources.options` of an MQTT source as the API accepts it. */
export const mqttOptionsInput = z.object(mqttOptionFields).partial().strict();

/** `sources.options` of an MQTT source as it is used: defaults applied, unknown keys dropped. */
export const mqttSourceOptions = z
  .object({
    ...mqttOptionFields,
    topics: mqttOptionFields.topics.default(['#']),
    protocolVersion: mqttOptionFields.protocolVersion.default('auto'),
    clientId: mqttOptionFields.clientId.optional(),
    sharedGroup: mqttOptionFields.sharedGroup.default('flocstream'),
    keepalive_s: mqttOptionFields.keepalive_s.default(30),
    tlsCa_pem: mqttOptionFields.tlsCa_pem.optional(),
    payload: mqttOptionFields.payload.default('json'),
    requestRebirth: mqttOptionFields.requestRebirth.default(false),
  })
  .strip();
export type MqttSourceOptions = z.infer<typeof mqttSourceOptions>;

export const OPCUA_SECURITY_MODES = ['None', 'Sign', 'SignAndEncrypt'] as const;
export const OPCUA_SECURITY_POLICIES = ['None', 'Basic256Sha256', 'Aes128_Sha256_RsaOaep', 'Aes256_Sha256_RsaPss'] as const;

const opcuaOptionFields = {
  securityMode: z.enum(OPCUA_SECURITY_MODES),
  securityPolicy: z.enum(OPCUA_SECURITY_POLICIES),
  publishingInterval_ms: z.number().int().min(50).max(60_000).meta({ description: 'subscription publishing interval [ms] (OPC 10000-4 §5.13.2)' }),
  samplingInterval_ms: z.number().int().min(0).max(3_600_000).meta({ description: 'default sampling interval of tags without their own [ms] (OPC 10000-4 §5.12.1.2)' }),
  /**
   * Trust a server certificate not yet in `<pki>/trusted` (otherwise it is put in `<pki>/rejected`
   * for an integrator to move). Only relevant with Sign or SignAndEncrypt.
   */
  acceptUnknownServerCertificate: z.boolean().meta({ description: 'trust a server certificate not yet in the trusted folder' }),
};

/** `sources.options` of an OPC UA source as the API accepts it (OPC 10000-4 §7.15 MessageSecurityMode, §7.36 SecurityPolicy). */
export const opcuaOptionsInput = z
  .object(opcuaOptionFields)
  .partial()
  .strict()
  .superRefine((o, ctx) => {
    // A secure channel with mode None uses policy None, and Sign/SignAndEncrypt need a real
    // policy (OPC 10000-4 §7.15, OPC 10000-7 SecurityPolicy None is "no security").
    const mode = o.securityMode ?? 'None';
    const policy = o.securityPolicy ?? 'None';
    if (mode === 'None' && policy !== 'None') ctx.addIssue({ code: 'custom', path: ['securityPolicy'], message: 'securityMode None goes with securityPolicy None' });
    if (mode !== 'None' && policy === 'None') ctx.addIssue({ code: 'custom', path: ['securityPolicy'], message: `securityMode ${mode} needs a securityPolicy other than None, e.g. Basic256Sha256` });
  });

/** `sources.options` of an OPC UA source as it is used: defaults applied, unknown keys dropped. */
export const opcuaSourceOptions = z
  .object({
    securityMode: opcuaOptionFields.securityMode.default('None'),
    securityPolicy: opcuaOptionFields.securityPolicy.default('None'),
    publishingInterval_ms: opcuaOptionFields.publishingInterval_ms.default(500),
    samplingInterval_ms: opcuaOptionFields.samplingInterval_ms.default(1_000),
    acceptUnknownServerCertificate: opcuaOptionFields.acceptUnknownServerCertificate.default(false),
  })
  .strip();
export type OpcuaSourceOptions = z.infer<typeof opcuaSourceOptions>;

export const sourceOptionsSchema: Record<SourceKind, z.ZodType> = { mqtt: mqttOptionsInput, opcua: opcuaOptionsInput };

// ---- sources ----
const sourceName = z.string().trim().min(1).max(64).meta({ description: 'unique within the plant' });
const username = z.string().min(1).max(256).meta({ description: 'user name for the broker / endpoint' });
const password = z.string().min(1).max(1024).meta({ description: 'write-only: stored on the server, never returned (answers say hasSecret)' });
const urlField = z.string().max(2048);

const sourceBase = { name: sourceName, username: username.nullable().optional(), password: password.nullable().optional(), enabled: z.boolean().optional() };

export const sourceCreate = z
  .discriminatedUnion('kind', [
    z.object({ kind: z.literal('mqtt'), url: urlField, options: mqttOptionsInput.optional(), ...sourceBase }).strict(),
    z.object({ kind: z.literal('opcua'), url: urlField, options: opcuaOptionsInput.optional(), ...sourceBase }).strict(),
  ])
  .superRefine((s, ctx) => {
    const issue = sourceUrlIssue(s.kind, s.url);
    if (issue) ctx.addIssue({ code: 'custom', path: ['url'], message: issue });
  });
export type SourceCreate = z.infer<typeof sourceCreate>;

/** Kind cannot change (its tags' addresses would not fit); url and options are checked against the stored kind. */
export const sourcePatch = z
  .object({
    name: sourceName.optional(),
    url: urlField.optional(),
    username: username.nullable().optional().meta({ description: 'null removes it' }),
    password: password.nullable().optional().meta({ description: 'null removes it; leave out to keep it' }),
    options: z.record(z.string(), z.unknown()).optional().meta({ description: 'replaces the options object (mqtt or opcua keys)' }),
    enabled: z.boolean().optional(),
  })
  .strict()
  .refine((p) => Object.keys(p).length > 0, { message: 'nothing to change' });
export type SourcePatch = z.infer<typeof sourcePatch>;

export const sourceOut = z
  .object({
    id: z.number().int(),
    plantId: z.number().int(),
    name: z.string(),
    kind: sourceKind,
    url: z.string(),
    username: z.string().nullable(),
    hasSecret: z.boolean().meta({ description: 'a password is stored (it is never returned)' }),
    options: z.record(z.string(), z.unknown()),
    enabled: z.boolean(),
    tags: z.number().int().meta({ description: 'tags configured on this source' }),
    createdAt: isoOut('created'),
  })
  .meta({ id: 'Source' });
export type SourceOut = z.infer<typeof sourceOut>;
export const sourcesResponse = z.object({ plantId: z.number().int(), sources: z.array(sourceOut) });

export const sourceDeleteQuery = z.object({ force: z.enum(['0', '1']).optional().meta({ description: '1 also deletes the tags of the source (and their mappings)' }) }).strict();

export const connectionTestOut = z.object({
  ok: z.boolean(),
  latency_ms: z.number().meta({ description: 'time to connect (and for OPC UA open a session) [ms], or until the failure' }),
  error: z.string().optional(),
  details: z.record(z.string(), z.unknown()).optional(),
});
export type ConnectionTestOut = z.infer<typeof connectionTestOut>;

// ---- OPC UA browse ----
export const browseQuery = z.object({ nodeId: z.string().min(1).max(4096).optional().meta({ description: 'NodeId to browse (OPC 10000-6 §5.3.1.10 string form); default the Objects folder, ns=0;i=85' }) }).strict();
export const browseNode = z.object({
  nodeId: z.string(),
  browseName: z.string(),
  displayName: z.string(),
  nodeClass: z.string().meta({ description: 'OPC 10000-3 §8.29 NodeClass name' }),
  hasChildren: z.boolean(),
  dataType: z.string().optional().meta({ description: 'variables only: the DataType name (or NodeId for a non-standard type)' }),
});
export type BrowseNode = z.infer<typeof browseNode>;
export const browseOut = z.object({ sourceId: z.number().int(), nodeId: z.string(), children: z.array(browseNode) });

// ---- MQTT discovery (table mqtt_discovery, written by ingest) ----
export const discoveredTopic = z.object({
  topic: z.string(),
  lastPayload: z.string().meta({ description: 'first 256 characters of the last payload' }),
  firstSeen: z.string().optional(),
  lastSeen: z.string(),
  count: z.number().meta({ description: 'messages seen, summed over every ingest worker' }),
  tagId: z.number().nullable(),
});
export const discoveryOut = z.object({
  sourceId: z.number().int(),
  asOf: z.string().nullable().meta({ description: 'the latest lastSeen of the list; null when ingest has listed no topic yet' }),
  topics: z.array(discoveredTopic),
  note: z.string().optional(),
});

// ---- tags ----
const finite = (description: string) => z.number().finite().meta({ description });
/** What a tag's value is; only an analog value can drift, so only it is checked for a flat line (ingest/pipeline/quality.ts). */
export const TAG_KINDS = ['analog', 'state', 'counter'] as const;
const tagFields = {
  name: z.string().trim().min(1).max(64).meta({ description: 'unique within the plant' }),
  sourceId: z.number().int().positive(),
  address: z.string().min(1).max(1024).meta({ description: 'MQTT topic (or filter with + and #), Sparkplug B metric path group/node/device/metric (device empty for node metrics), or OPC UA NodeId (ns=…;s=…)' }),
  unit: z.string().trim().min(1).max(16),
  description: z.string().max(200),
  scaleGain: finite('engineering value = raw × scaleGain + scaleOffset'),
  scaleOffset: finite('see scaleGain'),
  deadband: finite('absolute deadband in the engineering unit; 0 stores every change').min(0),
  expectedPeriod_s: finite('expected time between readings [s]; stale after 3 periods').positive().max(86_400),
  rangeLow: finite('lowest plausible value (engineering unit)').nullable(),
  rangeHigh: finite('highest plausible value (engineering unit)').nullable(),
  samplingInterval_ms: z.number().int().min(0).max(3_600_000).nullable().meta({ description: 'OPC UA sampling interval [ms]; null uses the source default' }),
  kind: z.enum(TAG_KINDS).meta({ description: 'analog (a measurement), state (e.g. pump running 0/1) or counter (a running total); only analog tags are checked for a flat line' }),
  enabled: z.boolean(),
};
export type TagKind = (typeof TAG_KINDS)[number];
const rangeOk = (t: { rangeLow?: number | null; rangeHigh?: number | null }) => t.rangeLow == null || t.rangeHigh == null || t.rangeLow < t.rangeHigh;
const rangeIssue = { message: 'rangeLow must be below rangeHigh', path: ['rangeHigh'] };

export const tagCreate = z
  .object({
    ...tagFields,
    description: tagFields.description.optional(),
    scaleGain: tagFields.scaleGain.optional(),
    scaleOffset: tagFields.scaleOffset.optional(),
    deadband: tagFields.deadband.optional(),
    expectedPeriod_s: tagFields.expectedPeriod_s.optional(),
    rangeLow: tagFields.rangeLow.optional(),
    rangeHigh: tagFields.rangeHigh.optional(),
    samplingInterval_ms: tagFields.samplingInterval_ms.optional(),
    kind: tagFields.kind.optional(),
    enabled: tagFields.enabled.optional(),
  })
  .strict()
  .refine(rangeOk, rangeIssue);
export type TagCreate = z.infer<typeof tagCreate>;

export const tagPatch = z
  .object(Object.fromEntries(Object.entries(tagFields).map(([k, v]) => [k, v.optional()])) as { [K in keyof typeof tagFields]: z.ZodOptional<(typeof tagFields)[K]> })
  .strict()
  .refine((p) => Object.keys(p).length > 0, { message: 'nothing to change' })
  .refine(rangeOk, rangeIssue);
export type TagPatch = z.infer<typeof tagPatch>;

export const mappingOut = z.object({ id: z.number().int(), signal: z.string(), targetType: z.string(), targetId: z.number().int(), targetCode: z.string().nullable(), tagId: z.number().int() });
export type MappingOut = z.infer<typeof mappingOut>;

export const tagConfigOut = z
  .object({
    id: z.number().int(),
    plantId: z.number().int(),
    name: z.string(),
    description: z.string(),
    source: z.object({ id: z.number().int(), name: z.string(), kind: sourceKind }),
    address: z.string(),
    unit: z.string(),
    scaleGain: z.number(),
    scaleOffset: z.number(),
    deadband: z.number(),
    expectedPeriod_s: z.number(),
    rangeLow: z.number().nullable(),
    rangeHigh: z.number().nullable(),
    samplingInterval_ms: z.number().int().nullable(),
    kind: z.enum(TAG_KINDS),
    enabled: z.boolean(),
    signals: z.array(mappingOut),
    createdAt: isoOut('created'),
  })
  .meta({ id: 'TagConfig' });
export type TagConfigOut = z.infer<typeof tagConfigOut>;
export const tagsConfigResponse = z.object({ plantId: z.number().int(), tags: z.array(tagConfigOut) });

/**
 * Why an address does not fit the source kind, or null. MQTT: a topic name or filter — `+` and
 * `#` only as whole levels and `#` only last (MQTT 5.0 §4.7.1), no NUL (§1.5.4), not starting
 * with `$` (§4.7.2, server topics). OPC UA: the string form of a NodeId, `ns=<index>;` or
 * `nsu=<uri>;` then `i=`, `s=`, `g=` or `b=` (OPC 10000-6 §5.3.1.10).
 */
export function tagAddressIssue(kind: SourceKind, address: string): string | null {
  if (kind === 'mqtt') {
    if (address.includes('\u0000')) return 'a topic may not contain U+0000';
    if (new TextEncoder().encode(address).length > 65_535) return 'a topic is at most 65 535 bytes';
    if (address.startsWith('$')) return 'topics starting with $ are the broker’s own';
    const levels = address.split('/');
    for (let i = 0; i < levels.length; i++) {
      const l = levels[i]!;
      if (l.includes('#') && (l !== '#' || i !== levels.length - 1)) return '# must be a whole level and the last one';
      if (l.includes('+') && l !== '+') return '+ must be a whole level';
    }
    return null;
  }
  const m = /^(?:ns=(\d{1,5});|nsu=([^;]+);)?(i|s|g|b)=(.+)$/s.exec(address);
  if (!m) return 'an OPC UA NodeId such as ns=2;s=Plant.Basin1.MLSS or ns=3;i=1001';
  const [, ns, , type, value] = m;
  if (ns !== undefined && Number(ns) > 65_535) return 'namespace index at most 65535';
  if (type === 'i' && !/^\d{1,10}$/.test(value!)) return 'i= takes a UInt32';
  if (type === 'g' && !/^[0-9a-fA-F]{8}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{12}$/.test(value!)) return 'g= takes a GUID';
  if (type === 'b' && !/^[A-Za-z0-9+/]+={0,2}$/.test(value!)) return 'b= takes base64';
  return null;
}

// ---- signal map ----
/** Targets a signal can be mapped to; the signal kind's prefix names its target type. */
export const MAPPING_TARGET_TYPES = ['plant', 'basin', 'clarifier', 'pump'] as const;
export type MappingTargetType = (typeof MAPPING_TARGET_TYPES)[number];
export function signalTargetType(signal: (typeof SIGNAL_KINDS)[number]): MappingTargetType {
  return signal.split('.')[0] as MappingTargetType;
}

export const mappingPut = z
  .object({
    signal: signalKind,
    targetType: z.enum(MAPPING_TARGET_TYPES),
    targetCode: z.string().min(1).max(32).optional().meta({ description: 'code of the basin, clarifier or pump (or the plant code); give this or targetId' }),
    targetId: z.number().int().positive().optional(),
    tagId: z.number().int().positive(),
  })
  .strict()
  .superRefine((m, ctx) => {
    const need = signalTargetType(m.signal);
    if (need !== m.targetType) ctx.addIssue({ code: 'custom', path: ['targetType'], message: `${m.signal} is a ${need} signal; targetType must be ${need}` });
    if (m.targetType !== 'plant' && m.targetCode === undefined && m.targetId === undefined) ctx.addIssue({ code: 'custom', path: ['targetCode'], message: `give the ${m.targetType} by targetCode or targetId` });
    if (m.targetCode !== undefined && m.targetId !== undefined) ctx.addIssue({ code: 'custom', path: ['targetId'], message: 'give targetCode or targetId, not both' });
  });
export type MappingPut = z.infer<typeof mappingPut>;
export const mappingPutOut = mappingOut.extend({ replacedTagId: z.number().int().nullable().meta({ description: 'the tag this signal was mapped to before, if another' }) });

// ---- CSV tag import ----
export const TAG_CSV_COLUMNS = ['name', 'source', 'address', 'unit', 'description', 'scale_gain', 'scale_offset', 'deadband', 'expected_period_s', 'range_low', 'range_high', 'signal', 'target'] as const;
export const TAG_CSV_REQUIRED = ['name', 'source', 'address', 'unit'] as const;
export const TAG_CSV_MAX_ROWS = 5000;
export const tagImportQuery = z.object({ dryRun: z.enum(['0', '1']).optional().meta({ description: '1 checks and previews the file without storing anything' }) }).strict();

export const tagImportRow = z.object({
  line: z.number().int(),
  name: z.string(),
  sourceId: z.number().int().nullable(),
  source: z.string(),
  address: z.string(),
  unit: z.string(),
  description: z.string(),
  scaleGain: z.number(),
  scaleOffset: z.number(),
  deadband: z.number(),
  expectedPeriod_s: z.number(),
  rangeLow: z.number().nullable(),
  rangeHigh: z.number().nullable(),
  signal: z.string().nullable(),
  target: z.string().nullable(),
});
export type TagImportRow = z.infer<typeof tagImportRow>;
export const tagImportOut = z.object({
  dryRun: z.boolean(),
  ok: z.boolean().meta({ description: 'true when every row is valid (a real import would store them all)' }),
  rows: z.array(tagImportRow).meta({ description: 'the rows that parsed (preview)' }),
  errors: z.record(z.string(), z.array(z.string())).meta({ description: 'line.<n>.<field> → messages; the header is line 1' }),
  imported: z.number().int(),
  tagIds: z.array(z.number().int()),
  mappings: z.number().int(),
});
export type TagImportOut = z.infer<typeof tagImportOut>;

// ---- ingest status (table ingest_workers, written by ingest) ----
/**
 * `details.sparkplug` of an MQTT source's status once it has seen a Sparkplug B message
 * (ingest/mqtt/sparkplug.ts; Eclipse Sparkplug 3.0).
 */
export const sparkplugStatus = z.object({
  messages: z.number().meta({ description: 'Sparkplug B messages received' }),
  seqGaps: z.number().meta({ description: 'missing payload sequence numbers (seq 0–255 wrapping; each missing number counts one)' }),
  deaths: z.number().meta({ description: 'NDEATH and DDEATH certificates applied (the tags under them marked bad)' }),
  rebirthRequests: z.number().meta({ description: 'rebirth commands sent (only with requestRebirth)' }),
  needRebirth: z.array(z.object({ edgeNode: z.string().meta({ description: 'group_id/edge_node_id' }), reason: z.string() })).meta({ description: 'edge nodes whose data ingest cannot read until they publish their births again' }),
  ignored: z.record(z.string(), z.number()).meta({ description: 'messages or metrics that produced nothing, counted by reason' }),
  edgeNodes: z.array(
    z.object({ edgeNode: z.string(), online: z.boolean(), bdSeq: z.number().nullable(), seq: z.number().nullable(), seqGaps: z.number(), devicesOnline: z.array(z.string()) }),
  ),
});
export type SparkplugStatus = z.infer<typeof sparkplugStatus>;

export const connectorStatus = z
  .object({
    sourceId: z.number(),
    name: z.string(),
    kind: sourceKind,
    state: z.string(),
    lastError: z.string().nullable(),
    connectedAt: z.string().nullable(),
    lastMessageAt: z.string().nullable(),
    messages: z.number(),
    samples: z.number(),
    unmapped: z.number(),
    deadLetters: z.number(),
    suppressed: z.number(),
    unacknowledged: z.number(),
    tags: z.number(),
    staleTags: z.number(),
    reconnects: z.number(),
    details: z.record(z.string(), z.unknown()),
  })
  .loose();
/**
 * A worker's spool (ingest/sink/spool.ts): batches fsync'd while PostgreSQL could not take them.
 * Unreadable files are kept and listed; a reached size cap holds acknowledgements (backpressure).
 * Both raise an `ingest-spool` alarm (server/services/alarm.service.ts spoolAlarmConditions).
 * `dir`, `pendingBytes` and `maxBytes` are per worker (absent in the API's sum over workers).
 */
export const spoolStatus = z.object({
  dir: z.string().optional(),
  bytes: z.number(),
  pendingBytes: z.number().optional(),
  maxBytes: z.number().optional(),
  files: z.number(),
  unreadable: z.array(z.object({ file: z.string(), bytes: z.number(), atByte: z.number(), error: z.string() })).default([]),
  capReached: z.boolean().default(false),
});
export type SpoolStatusOut = z.output<typeof spoolStatus>;

/** `ingest_workers.status`: what one ingest worker reports with each heartbeat. */
export const ingestWorkerStatus = z
  .object({
    /** Samples committed per second over the last heartbeat period. */
    samplesPerSec: z.number(),
    /** Receive → commit delay of the last flush [ms]. */
    lagMs: z.number(),
    spool: spoolStatus,
    writer: z.record(z.string(), z.unknown()),
    sources: z.array(connectorStatus),
    loadError: z.string().nullable(),
  })
  .loose();
export type IngestWorkerStatus = z.infer<typeof ingestWorkerStatus>;

/** A worker runs while its last heartbeat is younger than this many of its heartbeat periods. */
export const INGEST_HEARTBEAT_PERIODS = 3;
/**
 * A worker that stopped or went silent stays in `workers` (running false, shown stale) until its
 * last heartbeat is this many periods old (20 s at the default 2 s), then leaves the list; its
 * row is deleted after a day.
 */
export const INGEST_WORKER_SHOWN_PERIODS = 10;

export const ingestWorkerOut = z.object({
  id: z.string(),
  host: z.string(),
  pid: z.number().int(),
  startedAt: z.string(),
  heartbeatAt: z.string(),
  heartbeatAge_s: z.number(),
  heartbeat_ms: z.number().int().meta({ description: 'the worker\'s heartbeat period [ms]' }),
  running: z.boolean().meta({ description: `heartbeat younger than ${INGEST_HEARTBEAT_PERIODS} periods and not stopped` }),
  stoppedAt: z.string().nullable().meta({ description: 'set by a clean stop' }),
  samplesPerSec: z.number().nullable(),
  lagMs: z.number().nullable(),
  spool: spoolStatus.nullable(),
  sourceIds: z.array(z.number().int()),
  sources: z.number().int().meta({ description: 'sources this worker runs (held by lease, or its share of an MQTT 5 shared subscription)' }),
  messages: z.number().meta({ description: 'messages (MQTT) or notifications (OPC UA) received since the worker started, summed over its sources' }),
  samples: z.number().meta({ description: 'samples decoded since the worker started, summed over its sources' }),
  loadError: z.string().nullable(),
});
export type IngestWorkerOut = z.infer<typeof ingestWorkerOut>;

export const ingestStatusOut = z.object({
  running: z.boolean().meta({ description: 'at least one ingest worker has a fresh heartbeat' }),
  reason: z.string().optional().meta({ description: 'why running is false' }),
  heartbeatAt: z.string().nullable().meta({ description: 'the latest heartbeat of any worker' }),
  heartbeatAge_s: z.number().nullable(),
  pid: z.number().nullable().meta({ description: 'the worker with the latest heartbeat' }),
  startedAt: z.string().nullable(),
  samplesPerSec: z.number().nullable().meta({ description: 'summed over running workers (the last worker\'s figure when none runs)' }),
  lagMs: z.number().nullable().meta({ description: 'receive → commit delay of the last flush [ms], the largest of the running workers' }),
  spool: spoolStatus.nullable().meta({ description: 'summed over the workers shown; unreadable files listed, capReached if any worker reached its cap' }),
  writer: z.record(z.string(), z.unknown()).nullable().meta({ description: 'writer counters of the worker with the latest heartbeat' }),
  loadError: z.string().nullable(),
  sources: z.array(connectorStatus).meta({ description: 'connection state per source, from every running worker (the last worker when none runs)' }),
  deadLetters: z
    .object({
      lastHour: z.number().int().meta({ description: 'dead letters that arrived (first or again) in the last hour' }),
      total: z.number().int().meta({ description: 'dead letters stored: one per bad message (its source, address, reason and payload digest), however often it arrived' }),
      repeats: z.number().int().meta({ description: 'arrivals of a dead letter already stored (a bad message the broker delivered again, or published again), counted on its row' }),
    })
    .meta({ description: 'rows in dead_letters (undecodable or unmapped messages)' }),
  workers: z.array(ingestWorkerOut).meta({ description: `running workers, and those stopped or silent for less than ${INGEST_WORKER_SHOWN_PERIODS} heartbeat periods (shown stale), latest heartbeat first` }),
});
export type IngestStatusOut = z.infer<typeof ingestStatusOut>;
