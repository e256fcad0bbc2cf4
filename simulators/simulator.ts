/**
 * Runs the plant model against the clock and feeds its instruments to MQTT and OPC UA.
 *
 * Simulated time starts at `startTime` (default: now) and runs `speed` times faster than the
 * wall clock (1 = real time, up to 3600 = one hour per second); every source timestamp is in
 * simulated time. The model advances in fixed steps on a timer; readings produced in a tick
 * are published together at the end of it.
 */
import { PlantModel } from './model/plant-model.js';
import { Instrument, type Reading } from './instruments/instrument.js';
import { MqttPublisher, type MqttPublisherStats } from './protocols/mqtt-publisher.js';
import { SimOpcuaServer } from './protocols/opcua-server.js';
import { DEMO_PLANT, type DemoPlant } from './plant/demo-plant.js';
import { loadScenario, parseScenario } from './scenarios/load-scenario.js';
import type { Scenario } from './scenarios/scenario.schema.js';

export const DEFAULT_MQTT_URL = 'mqtt://127.0.0.1:18830';
export const DEFAULT_OPCUA_PORT = 48410;
export const DEFAULT_OPCUA_PATH = '/flocstream-sim';

export interface SimulatorOptions {
  /** Scenario name (simulators/scenarios/<name>.json), a .json path, or a scenario object. */
  scenario: string | Scenario;
  /** Simulated seconds per real second, 1–3600; default the scenario's recommendedSpeed. */
  speed?: number;
  seed?: number;
  /** Broker URL; null disables MQTT. Default mqtt://127.0.0.1:18830. */
  mqttUrl?: string | null;
  /** Broker credentials (the embedded broker's `simulator` user under `npm start`). */
  mqttUsername?: string;
  mqttPassword?: string;
  /** OPC UA port; null disables the OPC UA server. Default 48410. */
  opcuaPort?: number | null;
  opcuaHost?: string;
  /** Publish one batch message per tick instead of one message per value. */
  batch?: boolean;
  /** Data folder (OPC UA PKI goes to <dataDir>/pki/sim-server). Default ".data". */
  dataDir?: string;
  plant?: DemoPlant;
  /** Simulated time zero; default the real now (or now − catchUp_h). */
  startTime?: Date;
  /**
   * Start the simulated clock this many hours in the past and run at `speed` only until it
   * reaches the wall clock, then in real time: the data then never carries timestamps from the
   * future (which ingest rightly flags as clock skew), and a demo still shows hours of plant
   * behaviour within minutes.
   */
  catchUp_h?: number;
  /**
   * Start the simulated clock at this time (the newest sample a previous run stored) and catch
   * up to the wall clock as with `catchUp_h`: every reading is stamped after it, so a restart
   * never writes into a window that already holds data.
   */
  resumeFrom?: Date;
  /** Real-time period of the simulation loop [ms]; default 100. */
  tick_ms?: number;
  /** Fixed model step [s]; default 5. */
  modelStep_s?: number;
  mqttReconnectPeriod_ms?: number;
  log?: (line: string) => void;
}

export interface RunningSimulator {
  model: PlantModel;
  scenario: Scenario;
  speed: number;
  endpoints: { mqtt: string | null; opcua: string | null };
  /** Current simulated time. */
  simulatedNow(): Date;
  mqttStats(): MqttPublisherStats | null;
  stop(): Promise<void>;
}

export async function startSimulator(opts: SimulatorOptions): Promise<RunningSimulator> {
  const plant = opts.plant ?? DEMO_PLANT;
  const scenario = typeof opts.scenario === 'string' ? loadScenario(opts.scenario, plant) : parseScenario(opts.scenario, plant);
  const speed = opts.speed ?? scenario.recommendedSpeed;
  if (!(speed >= 1 && speed <= 3600)) throw new RangeError(`speed must be between 1 and 3600, got ${speed}`);
  const seed = opts.seed ?? 1;
  const catchUp = opts.catchUp_h !== undefined || opts.resumeFrom !== undefined;
  if (opts.catchUp_h !== undefined && !(opts.catchUp_h > 0 && opts.catchUp_h <= 24 * 30)) throw new RangeError(`catch-up must be between 0 and 720 h, got ${opts.catchUp_h}`);
  if (opts.resumeFrom && !(opts.resumeFrom.getTime() <= Date.now())) throw new RangeError(`resume time ${opts.resumeFrom.toISOString()} is in the future`);
  const start = opts.startTime ?? opts.resumeFrom ?? new Date(Date.now() - (opts.catchUp_h ?? 0) * 3_600_000);
  const epoch0 = start.getTime();
  const startHourOfDay = start.getUTCHours() + start.getUTCMinutes() / 60;
  const model = new PlantModel(plant, scenario, { seed, startHourOfDay, ...(opts.modelStep_s ? { step_s: opts.modelStep_s } : {}) });
  const instruments = plant.tags.map((t) => new Instrument(t, scenario.faults.filter((f) => f.tag === t.name), seed));
  const log = opts.log ?? (() => {});

  const mqttUrl = opts.mqttUrl === undefined ? DEFAULT_MQTT_URL : opts.mqttUrl;
  const publisher = mqttUrl
    ? new MqttPublisher({
        url: mqttUrl,
        plantCode: plant.code,
        batch: opts.batch ?? false,
        ...(opts.mqttUsername ? { username: opts.mqttUsername, password: opts.mqttPassword ?? '' } : {}),
        ...(opts.mqttReconnectPeriod_ms ? { reconnectPeriod_ms: opts.mqttReconnectPeriod_ms } : {}),
      })
    : null;
  const opcuaPort = opts.opcuaPort === undefined ? DEFAULT_OPCUA_PORT : opts.opcuaPort;
  let opcua: SimOpcuaServer | null = null;
  if (opcuaPort !== null) {
    try {
      opcua = await SimOpcuaServer.start({ plant, port: opcuaPort, dataDir: opts.dataDir ?? '.data', initialTimestamp: start, ...(opts.opcuaHost ? { host: opts.opcuaHost } : {}) });
    } catch (e) {
      await publisher?.close();
      throw e;
    }
  }

  const realStart = performance.now();
  const tick_ms = opts.tick_ms ?? 100;
  // Never let a stalled event loop turn into a burst of hours of catch-up work.
  const maxStepsPerTick = Math.ceil((10 * tick_ms * speed) / 1000 / (model.step_h * 3600)) + 10;
  let lag_h = 0;
  const tick = () => {
    const fast_h = ((performance.now() - realStart) * speed) / 3_600_000 - lag_h;
    // In catch-up mode the simulated clock never passes the wall clock.
    const target_h = catchUp ? Math.min(fast_h, (Date.now() - epoch0) / 3_600_000) : fast_h;
    const readings: Reading[] = [];
    let steps = 0;
    while (model.time_h + model.step_h <= target_h + 1e-12) {
      if (steps++ >= maxStepsPerTick) {
        lag_h += target_h - model.time_h;
        break;
      }
      model.step();
      for (const ins of instruments) {
        ins.track(model.signalValue(ins.tag.signal.kind, ins.tag.signal.target), model.step_h);
        ins.sample(model.time_h, epoch0, readings);
      }
    }
    if (readings.length === 0) return;
    publisher?.publish(readings.filter((r) => r.tag.protocol === 'mqtt'));
    opcua?.update(readings);
  };
  const timer = setInterval(tick, tick_ms);

  const endpoints = { mqtt: mqttUrl, opcua: opcua?.endpointUrl ?? null };
  log(
    `flocstream simulator: plant ${plant.code} (${plant.name}), scenario ${scenario.name}, speed ${speed}×` +
      (opts.resumeFrom ? ` resuming after ${opts.resumeFrom.toISOString()} until it meets the wall clock, then real time` : catchUp ? ` from ${opts.catchUp_h} h ago until it meets the wall clock, then real time` : '') +
      `, seed ${seed}; ` +
      `MQTT ${endpoints.mqtt ?? 'off'}${endpoints.mqtt ? (opts.batch ? ' (batched)' : ' (one value per message)') : ''}; OPC UA ${endpoints.opcua ?? 'off'}`,
  );

  let stopped: Promise<void> | null = null;
  return {
    model,
    scenario,
    speed,
    endpoints,
    simulatedNow: () => new Date(epoch0 + model.time_h * 3_600_000),
    mqttStats: () => (publisher ? { ...publisher.stats } : null),
    stop() {
      stopped ??= (async () => {
        clearInterval(timer);
        await Promise.all([publisher?.close(), opcua?.close()]);
      })();
      return stopped;
    },
  };
}
