import { bigserial, index, integer, pgTable, text, timestamp } from 'drizzle-orm/pg-core';

/**
 * Messages the built-in SMTP catcher received (server/mail/catcher.ts). With no SMTP_URL the
 * product mails to this catcher, so alarm and shift-summary e-mails can be read by an admin
 * (GET /outbox) without any outside mail server.
 */
export const mailOutbox = pgTable(
  'mail_outbox',
  {
    id: bigserial('id', { mode: 'number' }).primaryKey(),
    receivedAt: timestamp('received_at', { withTimezone: true }).notNull().defaultNow(),
    mailFrom: text('mail_from').notNull(),
    rcptTo: text('rcpt_to').array().notNull(),
    subject: text('subject').notNull().default(''),
    text: text('text').notNull().default(''),
    /** The whole RFC 5322 message as received. */
    raw: text('raw').notNull(),
    size: integer('size').notNull(),
  },
  (t) => [index('mail_outbox_received_idx').on(t.receivedAt)],
);
