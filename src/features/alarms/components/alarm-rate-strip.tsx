import { formatUtc } from '../../../lib/format.ts';
import { useAlarmSummary } from '../api/alarm-summary.ts';

/**
 * Alarms annunciated per 10 minutes over the last hours as a small bar strip; a bucket above the
 * flood threshold (ISA-18.2 gives more than 10 alarms in 10 minutes for one operator as its
 * example of a flood) is drawn in the alarm colour and marked.
 */
export function AlarmRateStrip({ plantId }: { plantId: number }) {
  const q = useAlarmSummary(plantId);
  if (!q.data) return null;
  const { buckets, floodThreshold, floodBuckets } = q.data;
  const top = Math.max(floodThreshold + 1, ...buckets.map((b) => b.raised));
  return (
    <div className="flex items-end gap-2 px-0.5" data-testid="alarm-rate">
      <span className="text-[11px] text-ink-3">per 10 min, last {Math.round((buckets.length * 10) / 60)} h</span>
      <div className="flex items-end gap-px h-6" role="img" aria-label={`${floodBuckets} flood periods (more than ${floodThreshold} alarms in 10 minutes)`}>
        {buckets.map((b) => (
          <span
            key={b.from}
            title={`${formatUtc(b.from)}: ${b.raised} annunciated, ${b.suppressed} suppressed${b.flood ? ' — flood' : ''}`}
            data-flood={b.flood || undefined}
            className={`w-1.5 ${b.flood ? 'bg-alarm-2' : 'bg-ink-3'}`}
            style={{ height: `${Math.max(b.raised > 0 ? 2 : 1, (b.raised / top) * 24)}px` }}
          />
        ))}
      </div>
      <span className={`text-[11px] ${floodBuckets ? 'text-alarm-2 font-semibold' : 'text-ink-3'}`}>
        {floodBuckets ? `▲ ${floodBuckets} flood period${floodBuckets > 1 ? 's' : ''} (> ${floodThreshold} in 10 min)` : `no flood (> ${floodThreshold} in 10 min)`}
      </span>
    </div>
  );
}
