import type { BalanceData } from '../../../../shared/contracts/balance.ts';
import type { SettlingCorrelationId } from '../../../../shared/domain/settling.ts';
import { formatValue } from '../../../lib/format.ts';
import { CORRELATION_LABEL } from '../../what-if/components/state-point-diagram.tsx';

type Settling = BalanceData['settling'];
type Used = Settling['used'];
type Fit = Settling['fit'];

export const correlationLabel = (id: string) => CORRELATION_LABEL[id as SettlingCorrelationId] ?? id;
const day = (iso: string | null | undefined) => (iso ? iso.slice(0, 10) : '—');
/** Number of points and their dates; `unit` names the points (hours of the operating fit). */
export const fitRange = (fit: Pick<Fit, 'n' | 'from' | 'to'>, unit = '') => `n = ${fit.n}${unit}${fit.from || fit.to ? `, ${day(fit.from)} – ${day(fit.to)}` : ''}`;

const SOURCE_NAME: Record<Used['source'], string> = { fit: 'plant fit (lab tests)', 'operating-fit': 'operating fit (stable-blanket hours)', correlation: 'correlation' };

/**
 * One line under a state point: the Vesilind v0 and k it used (with a fit's standard errors) and
 * their source — the fit to the plant's lab tests or to its stable-blanket hours, each with n and
 * dates (the state point's own, else the plant's), or the correlation.
 */
export function SettlingSourceLine({ used, settling }: { used: Used; settling: Settling }) {
  // A fit's standard errors beside its values: v0 ×/÷ e^SE of ln v0, k ± SE (one standard error).
  const v0Err = used.lnV0StdErr != null ? ` ×/÷ ${formatValue(Math.exp(used.lnV0StdErr), 3)}` : '';
  const kErr = used.kStdErr_Lg != null ? ` ± ${formatValue(used.kStdErr_Lg, 2)}` : '';
  const params = used.v0_mh === null || used.k_Lg === null ? 'v0, k unavailable' : `v0 = ${formatValue(used.v0_mh, 3)}${v0Err} m/h, k = ${formatValue(used.k_Lg, 3)}${kErr} L/g`;
  const basis = (f: Fit | undefined, unit: string) => fitRange(used.n != null ? { n: used.n, from: used.from ?? null, to: used.to ?? null } : (f ?? { n: 0, from: null, to: null }), unit);
  const source =
    used.source === 'fit'
      ? `fit to this plant's lab tests (${basis(settling.fit, '')})`
      : used.source === 'operating-fit'
        ? `fit to this plant's stable-blanket hours (${basis(settling.operatingFit, ' h')})`
        : `correlation ${correlationLabel(used.correlation)} from the latest index`;
  return (
    <p className={`text-[11px] mt-0.5 ${used.quality === 'good' ? 'text-ink-3' : 'text-estimated'}`} data-testid="settling-source" data-source={used.source} title={used.reasons.join('; ') || undefined}>
      Settling: {params} · {source}
    </p>
  );
}

/** One fit's row: name, n and dates (with r² and the minimum when short), v0 with its ×/÷ factor and k ± its standard error. */
function FitRow({ fit, name, unit, used, testId }: { fit: Fit; name: string; unit: string; used: boolean; testId: string }) {
  const factor = fit.lnV0StdErr === null ? null : Math.exp(fit.lnV0StdErr);
  return (
    <tr data-testid={testId} className={used ? 'text-ink font-semibold' : 'text-ink-2'}>
      <td className="font-sans">
        {used ? '▸ ' : ''}
        {name}
        <div className="text-[11px] text-ink-3 font-normal" title={fit.reasons.join('; ') || undefined}>
          {fitRange(fit, unit)}
          {fit.r2 !== null ? `, r² ${formatValue(fit.r2, 2)}` : ''}
          {fit.n < fit.minPoints ? ` (needs ${fit.minPoints})` : fit.v0_mh === null ? ' (no fit)' : ''}
        </div>
      </td>
      <td className="text-right align-top whitespace-nowrap">
        {formatValue(fit.v0_mh, 3)}
        {factor !== null ? <div className="text-[11px] text-ink-3 font-normal">×/÷ {formatValue(factor, 3)}</div> : null}
      </td>
      <td className="text-right align-top whitespace-nowrap">
        {formatValue(fit.k_Lg, 3)}
        {fit.kStdErr_Lg !== null ? <div className="text-[11px] text-ink-3 font-normal">± {formatValue(fit.kStdErr_Lg, 2)}</div> : null}
      </td>
    </tr>
  );
}

/**
 * The plant's settling parameters: the Vesilind fit to its lab tests and the fit to its
 * stable-blanket hours (each with standard errors, the number of points and their dates) beside
 * the correlation from the latest index, and which one the state points use. v0's standard error
 * is on ln v0 and shows as the factor e^(SE) (shared/domain/settling-fit.ts).
 */
export function SettlingComparison({ settling }: { settling: Settling }) {
  const { fit, operatingFit, correlation, used } = settling;
  return (
    <table className="w-full text-[12px] mt-0.5 border-t border-edge" data-testid="settling-comparison" aria-label="Settling parameters">
      <thead>
        <tr className="text-[11px] text-ink-3 text-left">
          <th className="font-normal">Vesilind</th>
          <th className="font-normal text-right">v0 [m/h]</th>
          <th className="font-normal text-right">k [L/g]</th>
        </tr>
      </thead>
      <tbody className="num">
        <FitRow fit={fit} name="Lab fit" unit="" used={used.source === 'fit'} testId="settling-fit" />
        {operatingFit ? <FitRow fit={operatingFit} name="Operating fit" unit=" h" used={used.source === 'operating-fit'} testId="settling-operating-fit" /> : null}
        <tr data-testid="settling-correlation" className={used.source === 'correlation' ? 'text-ink font-semibold' : 'text-ink-2'}>
          <td className="font-sans">
            {used.source === 'correlation' ? '▸ ' : ''}Correlation
            <div className="text-[11px] text-ink-3 font-normal">{correlationLabel(correlation.correlation)}</div>
          </td>
          <td className="text-right align-top">{formatValue(correlation.v0_mh, 3)}</td>
          <td className="text-right align-top">{formatValue(correlation.k_Lg, 3)}</td>
        </tr>
      </tbody>
      <tfoot>
        <tr>
          <td colSpan={3} className="text-[11px] text-ink-3 pt-0.5" data-testid="settling-used">
            ▸ state points use the {SOURCE_NAME[used.source]}; ± one standard error (v0: ×/÷ e^SE of ln v0).
          </td>
        </tr>
      </tfoot>
    </table>
  );
}
