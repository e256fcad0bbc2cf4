import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import {
  AttributeIds,
  ClientSubscription,
  MessageSecurityMode,
  OPCUACertificateManager,
  OPCUAClient,
  SecurityPolicy,
  StatusCodes,
  TimestampsToReturn,
  type ClientSession,
  type DataValue,
} from 'node-opcua';
import { startSimulator, type RunningSimulator } from '../../../simulators/simulator.js';
import { DEMO_PLANT } from '../../../simulators/plant/demo-plant.js';
import { loadScenario } from '../../../simulators/scenarios/load-scenario.js';
import { freePort, until } from './helpers.js';

let dataDir: string;
let sim: RunningSimulator;
let client: OPCUAClient;
let session: ClientSession;
const realStart = Date.now();

beforeAll(async () => {
  dataDir = mkdtempSync(join(tmpdir(), 'flocstream-opcua-'));
  const port = await freePort();
  // Clarifier 2's blanket detector reports bad quality throughout, to see the status code.
  const base = loadScenario('dry-weather', DEMO_PLANT);
  const scenario = { ...base, faults: [{ tag: 'LIT-212', kind: 'bad' as const, at_h: 0, duration_h: 1000 }] };
  sim = await startSimulator({ scenario, speed: 600, mqttUrl: null, opcuaPort: port, dataDir, tick_ms: 50 });
  client = OPCUAClient.create({
    applicationName: 'flocstream-sim-test',
    endpointMustExist: false,
    securityMode: MessageSecurityMode.None,
    securityPolicy: SecurityPolicy.None,
    connectionStrategy: { maxRetry: 2, initialDelay: 200, maxDelay: 500 },
    clientCertificateManager: new OPCUACertificateManager({ rootFolder: join(dataDir, 'pki', 'test-client') }),
  });
  await client.connect(sim.endpoints.opcua!);
  session = await client.createSession();
}, 60_000);

afterAll(async () => {
  await session?.close();
  await client?.disconnect();
  await sim?.stop();
  rmSync(dataDir, { recursive: true, force: true });
});

async function browseNames(nodeId: string): Promise<Map<string, string>> {
  const r = await session.browse(nodeId);
  return new Map((r.references ?? []).map((ref) => [ref.browseName.name!, ref.nodeId.toString()]));
}

describe('OPC UA server of the simulated plant', () => {
  it('exposes the endpoint at the configured path and keeps its PKI under the data folder', async () => {
    expect(sim.endpoints.opcua).toMatch(/^opc\.tcp:\/\/127\.0\.0\.1:\d+\/flocstream-sim$/);
    const { existsSync } = await import('node:fs');
    expect(existsSync(join(dataDir, 'pki', 'sim-server', 'server'))).toBe(true);
  });

  it('is browsable as Plant/TrainN/<unit>/<tag> with every OPC UA tag at its NodeId', async () => {
    const objects = await browseNames('ns=0;i=85');
    const plantId = objects.get('Plant');
    expect(plantId).toBeDefined();
    const plant = await browseNames(plantId!);
    expect([...plant.keys()]).toEqual(expect.arrayContaining(['Train1', 'Train2', 'FIT-401']));
    const train1 = await browseNames(plant.get('Train1')!);
    expect([...train1.keys()].sort()).toEqual(['Basin1', 'Clarifier1', 'RasPump1', 'WasPump1']);
    const found = new Map<string, string>();
    const walk = async (id: string, depth: number) => {
      for (const [name, child] of await browseNames(id)) {
        if (/^[A-Z]{2,3}-\d{3}$/.test(name)) found.set(name, child);
        else if (depth < 3) await walk(child, depth + 1);
      }
    };
    await walk(plantId!, 0);
    const opcuaTags = DEMO_PLANT.tags.filter((t) => t.protocol === 'opcua');
    expect([...found.keys()].sort()).toEqual(opcuaTags.map((t) => t.name).sort());
    for (const t of opcuaTags) expect(found.get(t.name)).toBe(t.address);
    // MQTT-only tags are not in the address space.
    expect(found.has('AIT-111')).toBe(false);
    const basin1 = await browseNames(train1.get('Basin1')!);
    expect(basin1.get('FIT-111')).toBe('ns=1;s=kb.train1.FIT-111');
    // AnalogItem: EURange is a property of the variable.
    const props = await browseNames('ns=1;s=kb.train1.LIT-211');
    expect(props.has('EURange')).toBe(true);
    expect(props.has('EngineeringUnits')).toBe(true);
  });

  it('reads values with good status and simulated source timestamps, and bad status for a failed sensor', async () => {
    await until(() => sim.model.time_h > 0.1, 10_000, 'simulated time to pass the slowest sample period');
    const [blanket, failed] = (await session.read(
      [{ nodeId: 'ns=1;s=kb.train1.LIT-211', attributeId: AttributeIds.Value }, { nodeId: 'ns=1;s=kb.train2.LIT-212', attributeId: AttributeIds.Value }],
      0,
    )) as DataValue[];
    expect(blanket!.statusCode.equals(StatusCodes.Good)).toBe(true);
    const level = blanket!.value.value as number;
    expect(level).toBeGreaterThan(0.1);
    expect(level).toBeLessThan(2); // dry weather, healthy sludge: a low blanket in a 4 m clarifier
    expect(blanket!.sourceTimestamp!.getTime()).toBeGreaterThan(realStart);
    expect(failed!.statusCode.equals(StatusCodes.BadSensorFailure)).toBe(true);
  });

  it('delivers subscribed changes as the simulation runs', async () => {
    const sub = ClientSubscription.create(session, { requestedPublishingInterval: 100, requestedMaxKeepAliveCount: 20, publishingEnabled: true });
    const values: DataValue[] = [];
    const item = await sub.monitor(
      { nodeId: 'ns=1;s=kb.train1.FIT-111', attributeId: AttributeIds.Value },
      { samplingInterval: 100, queueSize: 10, discardOldest: true },
      TimestampsToReturn.Both,
    );
    item.on('changed', (dv: DataValue) => values.push(dv));
    await until(() => values.length >= 3, 10_000, 'three notifications');
    await sub.terminate();
    const ts = values.map((v) => v.sourceTimestamp!.getTime());
    for (let i = 1; i < ts.length; i++) expect(ts[i]!).toBeGreaterThan(ts[i - 1]!);
    for (const v of values) expect(v.value.value as number).toBeGreaterThan(300); // half the plant influent
  });
});
