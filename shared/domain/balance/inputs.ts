/**
 * What the balance assembly takes: a plant's layout, the latest value of every mapped signal,
 * the rollup_1m series of those signals and the latest SVI — plain data read by the server
 * (server/repositories/balance.repository.ts, server/services/balance-inputs.service.ts) and
 * passed to computeBalance (./assemble.ts).
 */
import type { SignalKindName } from '../../contracts/plant-layout.js';
import type { LabSettlingTest, OperatingSettlingFit } from '../settling-fit.js';

export type TargetType = 'plant' | 'train' | 'basin' | 'clarifier' | 'pump';

/** One mapped signal with its latest value (tag_latest joined with tags and signal_map). */
export interface SignalReading {
  tagId: number;
  tag: string;
  signal: SignalKindName;
  targetType: TargetType;
  targetId: number;
  /** The tag's engineering unit (tags.unit). */
  unit: string;
  value: number | null;
  /** Sample quality code (shared/contracts/sample-quality.ts). */
  qualityCode: number;
  /** Sample (source) time; null when nothing was ever received for the tag. */
  ts_ms: number | null;
  /** Wall-clock time ingest received the value; null when nothing was ever received. */
  receivedAt_ms: number | null;
  expectedPeriod_s: number;
}

/** One rollup_1m bucket of a tag: the mean in the tag's unit, the worst quality code of the bucket. */
export interface SeriesPoint {
  t_ms: number;
  mean: number;
  qualityCode: number;
}

/** The plant's process units as the balance needs them (SI: m³, m², m, m³/h). */
export interface LayoutIn {
  plantId: number;
  code: string;
  peakFlow_m3h: number | null;
  trains: TrainLayout[];
}

export interface TrainLayout {
  id: number;
  code: string;
  basins: BasinLayout[];
  clarifiers: ClarifierLayout[];
  pumps: PumpLayout[];
}
export interface BasinLayout {
  id: number;
  code: string;
  volume_m3: number;
  /**
   * Aerated fraction of the basin's volume, 0 (anoxic/anaerobic) … 1 (fully aerated), from the
   * plant model; taken as 1 when absent (said so on the aerobic SRT).
   */
  aeratedFraction?: number;
}
export interface ClarifierLayout {
  id: number;
  code: string;
  /** Surface area of one unit [m²]. */
  area_m2: number;
  sideWaterDepth_m: number;
  /** Number of identical units behind this entry. */
  count: number;
}
export interface PumpLayout {
  id: number;
  code: string;
  kind: 'ras' | 'was';
  capacity_m3h: number;
}

/** The latest settleability test of the lab (SVI or DSVI, already in mL/g). */
export interface SviReading {
  kind: 'SVI' | 'DSVI';
  value_mLg: number;
  sampledAt_ms: number;
  flags: string[];
}

export interface BalanceEngineInputs {
  /** Wall clock of the computation (epoch ms). */
  now_ms: number;
  layout: LayoutIn;
  readings: SignalReading[];
  /** rollup_1m buckets per tag id, covering at least the longest window before the plant clock. */
  series: Map<number, SeriesPoint[]>;
  /** Latest SVI or DSVI from lab_results, or null. */
  svi: SviReading | null;
  /** Newest received_at over all tags of the plant (wall clock), or null when none ever arrived. */
  lastReceived_ms: number | null;
  /** The plant's settleability tests over the fit window (setting settling.fit_window_d), for the Vesilind fit; none when omitted. */
  settlingTests?: LabSettlingTest[];
  /**
   * The Vesilind fit to the plant's stable-blanket hours over settling.operating_window_d
   * (plantOperatingFit, ./operating-settling.ts), fitted by the server at most once per new hour
   * of data and passed in; none when omitted (the choice then skips it).
   */
  operatingFit?: OperatingSettlingFit;
}
