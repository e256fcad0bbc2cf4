import { z } from 'zod';

/**
 * Messages of the built-in mail catcher (`/api/v1/outbox`, used when SMTP_URL is not set):
 * what the server answers and the monitor reads, in one place.
 */
export const outboxSummary = z
  .object({ id: z.number().int(), receivedAt: z.iso.datetime(), from: z.string(), to: z.array(z.string()), subject: z.string(), size: z.number().int().meta({ description: 'raw message size [bytes]' }) });
export type OutboxSummary = z.infer<typeof outboxSummary>;

export const outboxMessage = outboxSummary.extend({ text: z.string().meta({ description: 'decoded text part' }), raw: z.string().meta({ description: 'the message as received (RFC 5322)' }) });
export type OutboxMessage = z.infer<typeof outboxMessage>;
