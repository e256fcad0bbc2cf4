import type { BalanceData } from '../../../../shared/contracts/balance.ts';
import type { SettlingCorrelationId } from '../../../../shared/domain/settling.ts';
import { formatValue } from '../../../lib/format.ts';
import { CORRELATION_LABEL } from '../../what-if/components/state-point-diagram.tsx';

type Used = BalanceData['settling']['used'];
type Fit = BalanceData['settling']['fit'];

export const correlationLabel = (id: string) => CORRELATION_LABEL[id as SettlingCorrelationId] ?? id;
const day = (iso: string | null) => (iso ? iso.slice(0, 10) : '—');
export const fitRange = (fit: Fit) => `n = ${fit.n}, ${day(fit.from)} – ${day(fit.to)}`;

/** One line under a state point: the Vesilind v0 and k it used and their source (the plant's fit with n and dates, or the correlation). */
export function SettlingSourceLine({ used, fit }: { used: Used; fit: Fit }) {
  const params = used.v0_mh === null || used.k_Lg === null ? 'v0, k unavailable' : `v0 = ${formatValue(used.v0_mh, 3)} m/h, k = ${formatValue(used.k_Lg, 3)} L/g`;
  const source = used.source === 'fit' ? `fit to this plant's tests (${fitRange(fit)})` : `correlation ${correlationLabel(used.correlation)} from the latest index`;
  return (
    <p className={`text-[11px] mt-0.5 ${used.quality === 'good' ? 'text-ink-3' : 'text-estimated'}`} data-testid="settling-source" data-source={used.source} title={used.reasons.join('; ') || undefined}>
      Settling: {params} · {source}
    </p>
  );
}

/**
 * The plant's settling parameters: the Vesilind fit to its own tests (with standard errors, the
 * number of tests and their dates) beside the correlation from the latest index, and which one
 * the state points use. The fit is linear in ln v, so v0's standard error is on ln v0 and shows
 * as the factor e^(SE) (shared/domain/settling-fit.ts).
 */
export function SettlingComparison({ settling }: { settling: BalanceData['settling'] }) {
  const { fit, correlation, used } = settling;
  const factor = fit.lnV0StdErr === null ? null : Math.exp(fit.lnV0StdErr);
  const row = (used_: boolean) => (used_ ? 'text-ink font-semibold' : 'text-ink-2');
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
        <tr data-testid="settling-fit" className={row(used.source === 'fit')}>
          <td className="font-sans">
            {used.source === 'fit' ? '▸ ' : ''}Plant fit
            <div className="text-[11px] text-ink-3 font-normal" title={fit.reasons.join('; ') || undefined}>
              {fitRange(fit)}
              {fit.r2 !== null ? `, r² ${formatValue(fit.r2, 2)}` : ''}
              {fit.n < fit.minPoints ? ` (needs ${fit.minPoints})` : ''}
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
        <tr data-testid="settling-correlation" className={row(used.source === 'correlation')}>
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
            ▸ state points use the {used.source === 'fit' ? 'plant fit' : 'correlation'}; ± one standard error (v0: ×/÷ e^SE of ln v0).
          </td>
        </tr>
      </tfoot>
    </table>
  );
}
