/**
 * OPC UA server of the simulated plant (node-opcua 2.182). Address space, in the server's
 * own namespace (index 1, URI urn:flocstream:simulator): Objects/Plant/<Train n>/<Basin n|Clarifier n|RasPump n|WasPump n>/<tag>
 * and Objects/Plant/<tag> for plant-wide tags; NodeIds are the tags' addresses
 * ("ns=1;s=kb.train1.LIT-211"). Each tag is an AnalogItem with EURange and EngineeringUnits;
 * values carry the transmitter's status code and source timestamp (OPC 10000-4 §7.7 DataValue).
 *
 * PKI lives under <dataDir>/pki/sim-server (server and user certificate managers), never in
 * the home folder. minimumSamplingInterval is set on every variable so clients may sample
 * faster than node-opcua's 1000 ms default.
 */
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import {
  DataType,
  OPCUACertificateManager,
  OPCUAServer,
  StatusCodes,
  makeEUInformation,
  type Namespace,
  type StatusCode,
  type UAObject,
  type UAVariable,
} from 'node-opcua';
import type { DemoPlant, DemoTag } from '../plant/demo-plant.js';
import type { Reading } from '../instruments/instrument.js';

/** applicationUri of the simulator, hence the URI of its own namespace (index 1). */
export const SIM_NAMESPACE_URI = 'urn:flocstream:simulator';

export interface SimOpcuaServerOptions {
  plant: DemoPlant;
  port: number;
  host?: string;
  dataDir: string;
  resourcePath?: string;
  /** Fastest sampling a client may ask for [ms]. */
  minimumSamplingInterval_ms?: number;
  /** Source timestamp of the "no data yet" placeholder: the simulated start, so it never
   * outranks the first simulated sample (default: now). */
  initialTimestamp?: Date;
}

const UNITS: Record<string, [string, string, string]> = {
  'm3/h': ['m³/h', 'm3/h', 'cubic metre per hour'],
  'g/L': ['g/L', 'g/L', 'gram per litre'],
  'mg/L': ['mg/L', 'mg/L', 'milligram per litre'],
  m: ['m', 'm', 'metre'],
  state: ['', 'state', 'running state (1 running, 0 stopped)'],
};

function statusOf(r: Reading): StatusCode {
  if (r.quality === 'good') return StatusCodes.Good;
  if (r.quality === 'uncertain') return r.reason === 'saturated' ? StatusCodes.UncertainEngineeringUnitsExceeded : StatusCodes.Uncertain;
  return r.reason === 'sensor-failure' ? StatusCodes.BadSensorFailure : StatusCodes.Bad;
}

/** Folder path of a tag from its signal target, e.g. ["Train1", "Clarifier1"]. */
export function folderPathOf(plant: DemoPlant, tag: DemoTag): string[] {
  const target = tag.signal.target;
  for (const [i, tr] of plant.trains.entries()) {
    const trainFolder = `Train${i + 1}`;
    const bi = tr.basins.findIndex((b) => b.code === target);
    if (bi >= 0) return [trainFolder, `Basin${i + 1}`];
    if (tr.clarifiers.some((c) => c.code === target)) return [trainFolder, `Clarifier${i + 1}`];
    const pump = tr.pumps.find((p) => p.code === target);
    if (pump) return [trainFolder, `${pump.kind === 'ras' ? 'Ras' : 'Was'}Pump${i + 1}`];
  }
  return [];
}

export class SimOpcuaServer {
  private readonly server: OPCUAServer;
  private readonly variables = new Map<string, UAVariable>();
  readonly endpointUrl: string;

  private constructor(server: OPCUAServer, endpointUrl: string) {
    this.server = server;
    this.endpointUrl = endpointUrl;
  }

  static async start(opts: SimOpcuaServerOptions): Promise<SimOpcuaServer> {
    const pki = join(opts.dataDir, 'pki', 'sim-server');
    mkdirSync(pki, { recursive: true });
    const serverCertificateManager = new OPCUACertificateManager({ rootFolder: join(pki, 'server'), automaticallyAcceptUnknownCertificate: true });
    const userCertificateManager = new OPCUACertificateManager({ rootFolder: join(pki, 'user'), automaticallyAcceptUnknownCertificate: true });
    const host = opts.host ?? '127.0.0.1';
    const resourcePath = opts.resourcePath ?? '/flocstream-sim';
    const server = new OPCUAServer({
      port: opts.port,
      host,
      hostname: host,
      resourcePath,
      serverCertificateManager,
      userCertificateManager,
      buildInfo: { productName: 'Flocstream plant simulator', manufacturerName: 'Flocstream', productUri: SIM_NAMESPACE_URI },
      serverInfo: { applicationUri: SIM_NAMESPACE_URI, productUri: SIM_NAMESPACE_URI, applicationName: { text: `Flocstream simulator — ${opts.plant.name}` } },
    });
    await server.initialize();
    const self = new SimOpcuaServer(server, `opc.tcp://${host}:${opts.port}${resourcePath}`);
    self.build(opts.plant, opts.minimumSamplingInterval_ms ?? 100, opts.initialTimestamp ?? new Date());
    await server.start();
    return self;
  }

  private build(plant: DemoPlant, msi: number, initialTs: Date): void {
    const addressSpace = this.server.engine.addressSpace!;
    // The server's own namespace is index 1 and carries the applicationUri, so the tags'
    // "ns=1;s=…" addresses are stable whatever other namespaces the stack registers.
    const ns: Namespace = addressSpace.getOwnNamespace();
    const root = ns.addFolder(addressSpace.rootFolder.objects, { browseName: 'Plant', nodeId: `s=${plant.code}`, description: plant.name });
    const folders = new Map<string, UAObject>([['', root]]);
    const folder = (path: string[]): UAObject => {
      let parent = root;
      for (let i = 0; i < path.length; i++) {
        const key = path.slice(0, i + 1).join('/');
        let f = folders.get(key);
        if (!f) {
          f = ns.addFolder(parent, { browseName: path[i]!, nodeId: `s=${plant.code}.${key.replace(/\//g, '.').toLowerCase()}` });
          folders.set(key, f);
        }
        parent = f;
      }
      return parent;
    };
    for (const tag of plant.tags.filter((t) => t.protocol === 'opcua')) {
      const m = /^ns=1;(s=.+)$/.exec(tag.address);
      if (!m) throw new Error(`OPC UA tag ${tag.name} needs an address "ns=1;s=…", got ${tag.address}`);
      const [symbol, shortName, longName] = UNITS[tag.unit] ?? [tag.unit, tag.unit, tag.unit];
      const v = ns.addAnalogDataItem({
        componentOf: folder(folderPathOf(plant, tag)),
        browseName: tag.name,
        nodeId: m[1]!,
        description: `${tag.description} [${tag.unit}]`,
        dataType: 'Double',
        engineeringUnitsRange: { low: tag.rangeLow, high: tag.rangeHigh },
        engineeringUnits: makeEUInformation(symbol, shortName, longName),
        minimumSamplingInterval: msi,
      });
      // No value until the transmitter's first sample: a client must see "no data yet", not 0.
      v.setValueFromSource({ dataType: DataType.Double, value: 0 }, StatusCodes.BadWaitingForInitialData, initialTs);
      this.variables.set(tag.name, v);
    }
  }

  /** Applies transmitter readings (value, status code, source timestamp). */
  update(readings: Reading[]): void {
    for (const r of readings) {
      if (r.tag.protocol !== 'opcua') continue;
      const v = this.variables.get(r.tag.name);
      if (!v) continue;
      v.setValueFromSource({ dataType: DataType.Double, value: r.value ?? 0 }, statusOf(r), new Date(r.ts_ms));
    }
  }

  async close(): Promise<void> {
    await this.server.shutdown(0);
  }
}
