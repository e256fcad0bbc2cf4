import type { AddressInfo } from 'node:net';
import type { Logger } from 'pino';
import { SMTPServer } from 'smtp-server';
import type { Database } from '../db/client.ts';
import { mailOutbox } from '../db/schema/index.ts';
import { messageText } from './message-text.ts';

export interface MailCatcher {
  port: number;
  url: string;
  close(): Promise<void>;
}

/** Largest message the catcher takes (alarm and summary mails are a few kB). */
const MAX_BYTES = 1 << 20;

/**
 * The product's own SMTP catcher: an SMTP server on 127.0.0.1 (RFC 5321, no AUTH, no TLS:
 * loopback only) that stores every message it receives in mail_outbox, where admins read them
 * (GET /api/v1/outbox). It is what the mailer sends to when no SMTP_URL is configured, so alarm
 * e-mails work out of the box and nothing leaves the machine. Port 0 picks a free port.
 */
export async function startMailCatcher(database: Database, log: Logger, port: number): Promise<MailCatcher> {
  const server = new SMTPServer({
    authOptional: true,
    disabledCommands: ['AUTH', 'STARTTLS'],
    size: MAX_BYTES,
    banner: 'Flocstream mail catcher (messages are stored, never relayed)',
    logger: false,
    onData(stream, session, callback) {
      const chunks: Buffer[] = [];
      stream.on('data', (c: Buffer) => chunks.push(c));
      stream.on('end', () => {
        if (stream.sizeExceeded) return callback(Object.assign(new Error('message too large'), { responseCode: 552 }));
        const raw = Buffer.concat(chunks).toString('utf8');
        const { subject, text } = messageText(raw);
        const from = session.envelope.mailFrom ? session.envelope.mailFrom.address : '';
        database.db
          .insert(mailOutbox)
          .values({ mailFrom: from, rcptTo: session.envelope.rcptTo.map((r) => r.address), subject, text, raw, size: Buffer.byteLength(raw) })
          .then(
            () => callback(),
            (err: Error) => {
              log.error({ err }, 'mail catcher: could not store a message');
              callback(Object.assign(new Error('could not store the message'), { responseCode: 451 }));
            },
          );
      });
    },
  });
  server.on('error', (err) => log.warn({ err }, 'mail catcher error'));
  await new Promise<void>((resolve, reject) => {
    const onErr = (err: NodeJS.ErrnoException) =>
      reject(err.code === 'EADDRINUSE' ? new Error(`mail catcher: port ${port} on 127.0.0.1 is in use; set the setting mail.catcher_port or SMTP_URL`) : err);
    server.server.once('error', onErr);
    server.listen(port, '127.0.0.1', () => {
      server.server.off('error', onErr);
      resolve();
    });
  });
  const actual = (server.server.address() as AddressInfo).port;
  return {
    port: actual,
    url: `smtp://127.0.0.1:${actual}`,
    close: () => new Promise<void>((r) => server.close(() => r())),
  };
}
