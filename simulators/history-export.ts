/**
 * The plant's past as a historian would export it: the model run as fast as it computes over
 * `days` days ending at `end`, every instrument read at its own period (or the export step,
 * whichever is longer: historians commonly export one-minute values, common practice), written
 * as a long-layout CSV `tag,ts,value,quality` (the layout the product's historian import reads,
 * shared/contracts/history.ts). Nothing is published: the product imports the file.
 */
import fs from 'node:fs';
import { once } from 'node:events';
import { PlantModel } from './model/plant-model.js';
import { Instrument, type Reading } from './instruments/instrument.js';
import { DEMO_PLANT, type DemoPlant } from './plant/demo-plant.js';
import { loadScenario } from './scenarios/load-scenario.js';

export interface HistoryExportOptions {
  scenario: string;
  seed?: number;
  plant?: DemoPlant;
  /** End of the history (exclusive); default now. */
  end?: Date;
  days: number;
  /** Export step [s]: a tag is written at its own period or this, whichever is longer. Default 60. */
  step_s?: number;
  out: string;
}

export interface HistoryExportResult {
  rows: number;
  from: Date;
  to: Date;
  /** Newest sample time written. */
  last: Date | null;
}

export async function exportHistory(opts: HistoryExportOptions): Promise<HistoryExportResult> {
  const plant = opts.plant ?? DEMO_PLANT;
  const scenario = loadScenario(opts.scenario, plant);
  const seed = opts.seed ?? 1;
  const end = (opts.end ?? new Date()).getTime();
  const start = end - opts.days * 86_400_000;
  const step_s = opts.step_s ?? 60;
  const d0 = new Date(start);
  // The model's longest stable step (15 s, the layered settler's explicit limit) rather than the
  // live 5 s: three times fewer steps for weeks of one-minute values.
  const model = new PlantModel(plant, scenario, { seed, startHourOfDay: d0.getUTCHours() + d0.getUTCMinutes() / 60, step_s: 15 });
  const instruments = plant.tags.map(
    (t) =>
      new Instrument(
        { ...t, expectedPeriod_s: Math.max(t.expectedPeriod_s, step_s) },
        scenario.faults.filter((f) => f.tag === t.name),
        seed,
      ),
  );
  const file = fs.createWriteStream(opts.out);
  file.write('tag,ts,value,quality\n');
  const total_h = (end - start) / 3_600_000;
  let rows = 0;
  let last = -Infinity;
  let text = '';
  const readings: Reading[] = [];
  while (model.time_h + model.step_h <= total_h + 1e-12) {
    model.step();
    for (const ins of instruments) {
      ins.track(model.signalValue(ins.tag.signal.kind, ins.tag.signal.target), model.step_h);
      ins.sample(model.time_h, start, readings);
    }
    if (readings.length === 0) continue;
    for (const r of readings) {
      if (r.ts_ms >= end) continue;
      text += `${r.tag.name},${new Date(r.ts_ms).toISOString()},${r.value ?? ''},${r.quality}\n`;
      rows++;
      if (r.ts_ms > last) last = r.ts_ms;
    }
    readings.length = 0;
    if (text.length > 1 << 16) {
      if (!file.write(text)) await once(file, 'drain');
      text = '';
    }
  }
  file.end(text);
  await once(file, 'finish');
  return { rows, from: new Date(start), to: new Date(end), last: Number.isFinite(last) ? new Date(last) : null };
}
