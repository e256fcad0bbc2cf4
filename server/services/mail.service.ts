import nodemailer, { type SendMailOptions } from 'nodemailer';
import type { Logger } from 'pino';
import type { AlarmOut } from '../../shared/contracts/alarm.ts';
import { OPERATOR_CAUTION, type BalanceData, type FigureOut } from '../../shared/contracts/balance.ts';
import type { AlarmRepository } from '../repositories/alarm.repository.ts';
import type { BalanceRepository } from '../repositories/balance.repository.ts';
import type { NotificationRepository } from '../repositories/notification.repository.ts';
import { toAlarmOut } from './alarm.service.ts';
import type { SettingsService } from './settings.service.ts';

const PRIORITY_WORD = { 1: 'urgent', 2: 'high', 3: 'medium', 4: 'low' } as const;

function fig(f: FigureOut | undefined, digits = 2, scale = 1, unit = f?.unit ?? ''): string {
  if (!f || f.value === null) return `unavailable${f?.reasons.length ? ` (${f.reasons[0]})` : ''}`;
  const v = `${(f.value * scale).toFixed(digits)}${unit && unit !== '-' ? ` ${unit}` : ''}`;
  return f.quality === 'estimated' ? `${v} (estimated)` : v;
}

/** Plain-text body of an alarm e-mail (pure). */
export function alarmMailText(a: AlarmOut, plantName: string): { subject: string; text: string } {
  const subject = `[Flocstream P${a.priority} ${a.state}] ${plantName}: ${a.rule} ${a.target}`;
  const lines = [
    `Plant:     ${plantName}`,
    `Alarm:     ${a.rule} on ${a.target}`,
    `Priority:  ${a.priority} (${PRIORITY_WORD[a.priority as 1 | 2 | 3 | 4]})`,
    `State:     ${a.state}`,
    `Raised at: ${a.raisedAt}`,
    ...(a.value !== null ? [`Value:     ${a.value}`] : []),
    ...(a.limit !== null ? [`Limit:     ${a.limit}`] : []),
    '',
    a.message,
    '',
    OPERATOR_CAUTION,
    'Acknowledge in the Flocstream monitor (operator role or higher).',
  ];
  return { subject, text: lines.join('\n') };
}

/** Plain-text daily shift summary from the latest balance and the alarms of the period (pure). */
export function shiftSummaryText(plantName: string, from: Date, to: Date, latest: { ts: Date; quality: string; data: BalanceData } | null, alarms: AlarmOut[]): { subject: string; text: string } {
  const subject = `[Flocstream] ${plantName}: shift summary ${to.toISOString().slice(0, 10)}`;
  const L: string[] = [`Shift summary for ${plantName}`, `Period: ${from.toISOString()} – ${to.toISOString()}`, ''];
  if (!latest) L.push('No balance was computed in this period (is ingest running?).');
  else {
    const d = latest.data;
    L.push(`Latest balance ${latest.ts.toISOString()} (overall quality: ${latest.quality})`);
    L.push(`  Sludge inventory: ${fig(d.inventory.totalMass_kg, 0)} (basins ${fig(d.inventory.aerationMass_kg, 0)}, clarifiers ${fig(d.inventory.clarifierMass_kg, 0)})`);
    L.push(`  Stored in clarifiers: ${fig(d.inventory.storedFraction, 0, 100, '%')}`);
    L.push(`  SRT (rolling ${d.srt.coverage < 1 ? `${Math.round(d.srt.coverage * 100)} % covered` : 'window'}): ${fig(d.srt.total_d, 1)}; dynamic ${fig(d.srt.dynamic_d, 1)}; target ${d.srt.target_d} d`);
    L.push(`  WAS flow now ${fig(d.srt.wasFlow_m3h, 1)}; for the target SRT ${fig(d.srt.wasAdvice_m3h, 1)}`);
    L.push(`  Latest ${d.settleability.kind ?? 'SVI'}: ${fig(d.settleability.svi_mLg, 0)}${d.settleability.sampledAt ? ` (${d.settleability.sampledAt})` : ''}`);
    L.push(`  Storm flow used: ${fig(d.storm.peakFlow_m3h, 0)}`);
    for (const t of d.trains) {
      L.push(`  ${t.code}: MLSS ${fig(t.mlss_gL)}, RAS concentration margin ${fig(t.ras.concentrationMargin, 0, 100, '%')}, pump margin ${fig(t.ras.pumpMargin, 0, 100, '%')}`);
      const failed = t.storm.checks.filter((c) => !c.ok).map((c) => c.rule);
      L.push(`    storm projection: MLSS ${fig(t.storm.equilibriumMlss_gL)}, blanket rise ${fig(t.storm.blanketRise_m)}${failed.length ? `; fails ${failed.join(', ')}` : t.storm.checks.length ? '; all checks pass' : ''}`);
    }
  }
  L.push('');
  const open = alarms.filter((a) => a.state !== 'cleared');
  L.push(`Alarms in the period: ${alarms.length} (${open.length} still active)`);
  for (const a of alarms) L.push(`  P${a.priority} ${a.state.padEnd(12)} ${a.raisedAt}  ${a.rule} ${a.target}${a.clearedAt ? `  cleared ${a.clearedAt}` : ''}`);
  L.push('', OPERATOR_CAUTION);
  return { subject, text: L.join('\n') };
}

/** The part of a nodemailer transport the mail service uses. */
export interface MailTransport {
  sendMail(m: SendMailOptions): Promise<{ messageId: string }>;
  close(): void;
}

/** A nodemailer transport to `url` (SMTP_URL, or the built-in catcher, which speaks plain SMTP on loopback only). */
export function smtpTransport(url: string, opts: { catcher?: boolean } = {}): MailTransport {
  const u = new URL(url);
  return opts.catcher ? nodemailer.createTransport({ host: u.hostname, port: Number(u.port), secure: false, ignoreTLS: true }) : nodemailer.createTransport(url);
}

export interface MailServiceDeps {
  transport: MailTransport;
  settings: Pick<SettingsService, 'effective'>;
  notificationRepo: Pick<NotificationRepository, 'record'>;
  balanceRepo: Pick<BalanceRepository, 'plant' | 'latest'>;
  alarmRepo: Pick<AlarmRepository, 'between'>;
  log: Pick<Logger, 'warn'>;
}

/**
 * E-mail through a transport. Every attempt is recorded in `notifications` with its status, so
 * a failed delivery is visible, never silent.
 */
export function createMailService({ transport, settings, notificationRepo, balanceRepo, alarmRepo, log }: MailServiceDeps) {
  const record = notificationRepo.record;
  const send = async (kind: string, plantId: number, subject: string, text: string, extra: Record<string, unknown>) => {
    const s = await settings.effective(plantId);
    const to = s['mail.recipients'];
    if (!to.length) {
      await record(kind, [], subject, 'skipped', { ...extra, reason: 'no recipients (setting mail.recipients)' });
      return false;
    }
    try {
      const info = await transport.sendMail({ from: s['mail.from'], to, subject, text, textEncoding: 'base64' } as SendMailOptions);
      await record(kind, to, subject, 'sent', { ...extra, messageId: info.messageId });
      return true;
    } catch (err) {
      log.warn({ err, kind, plantId }, 'mail: sending failed');
      await record(kind, to, subject, 'failed', { ...extra, error: (err as Error).message });
      return false;
    }
  };
  const plantName = async (plantId: number) => (await balanceRepo.plant(plantId))?.name ?? `plant ${plantId}`;
  return {
    /** Mails a raised alarm when its priority is within `mail.min_priority`. */
    async alarm(a: AlarmOut): Promise<boolean> {
      const s = await settings.effective(a.plantId);
      if (a.priority > s['mail.min_priority']) return false;
      const m = alarmMailText(a, await plantName(a.plantId));
      return send('alarm', a.plantId, m.subject, m.text, { alarmId: a.id, rule: a.rule });
    },
    /** The daily shift summary of the 24 h before `to`. */
    async shiftSummary(plantId: number, to = new Date()): Promise<boolean> {
      const from = new Date(to.getTime() - 86_400_000);
      const latest = await balanceRepo.latest(plantId);
      const rows = (await alarmRepo.between(plantId, from, to)).map(toAlarmOut);
      const m = shiftSummaryText(await plantName(plantId), from, to, latest ? { ts: latest.ts, quality: latest.quality, data: latest.data as BalanceData } : null, rows);
      return send('shift-summary', plantId, m.subject, m.text, { from: from.toISOString(), to: to.toISOString() });
    },
    close: () => transport.close(),
  };
}
export type MailService = ReturnType<typeof createMailService>;
