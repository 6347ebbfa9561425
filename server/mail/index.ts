import nodemailer, { type Transporter } from 'nodemailer';
import { SMTPServer } from 'smtp-server';
import type { AddressObject } from 'mailparser';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import type { AddressInfo } from 'node:net';

export interface OutgoingMail {
  to: string[];
  subject: string;
  text: string;
  /** The hospital the message is sent for; it travels in a header our own mail catcher reads. */
  hospitalId?: number | null;
  /** What the Messages sent page records beside the e-mail (its case, its place in a page's rounds). */
  record?: { caseId?: number | null; userId?: number | null; tier?: number | null; round?: number | null; fallbackOf?: number | null };
}

export const HOSPITAL_HEADER = 'X-Plumbline-Hospital';

export interface Mailer {
  send(mail: OutgoingMail): Promise<{ messageId: string }>;
  /** True when the built-in SMTP fake receives what is sent, so the Messages sent page has it. */
  readonly local: boolean;
  close(): Promise<void>;
}

function addresses(value: AddressObject | AddressObject[] | undefined): string[] {
  const list = Array.isArray(value) ? value : value ? [value] : [];
  return list.flatMap((entry) => entry.value.map((a) => a.address ?? '')).filter(Boolean);
}

/** A real SMTP server on loopback that stores every message it is given in the database. */
async function startSmtpFake(db: Knex, logger: Logger, clock: { now(): number }): Promise<{ port: number; close(): Promise<void> }> {
  const server = new SMTPServer({
    authOptional: true,
    disabledCommands: ['AUTH', 'STARTTLS'],
    banner: 'Plumbline local mail',
    size: 1024 * 1024,
    logger: false,
    // A stop waits this long for a message still being received, not the default 30 s.
    closeTimeout: 1000,
    onData(stream, session, callback) {
      // The parser is loaded on the first message: most starts never receive one, and it is large.
      import('mailparser')
        .then(({ simpleParser }) => simpleParser(stream))
        .then(async (parsed) => {
          const recipients = session.envelope.rcptTo.map((r) => r.address);
          await db('mail_messages').insert({
            received_at: clock.now(),
            sender: session.envelope.mailFrom ? session.envelope.mailFrom.address : addresses(parsed.from)[0] ?? '',
            recipients: JSON.stringify(recipients.length ? recipients : addresses(parsed.to)),
            subject: parsed.subject ?? '',
            text: parsed.text ?? '',
            message_id: parsed.messageId ?? null,
            hospital_id: Number(parsed.headers.get(HOSPITAL_HEADER.toLowerCase())) || null,
          });
          callback();
        })
        .catch((err) => {
          logger.error({ err }, 'local mail could not be stored');
          callback(err);
        });
    },
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const { port } = server.server.address() as AddressInfo;
  return { port, close: () => new Promise((resolve) => server.close(() => resolve())) };
}

export async function createMailer(opts: { smtpUrl: string | null; from: string; db: Knex; logger: Logger; clock: { now(): number } }): Promise<Mailer> {
  let transport: Transporter;
  let fake: { port: number; close(): Promise<void> } | null = null;
  if (opts.smtpUrl) {
    transport = nodemailer.createTransport(opts.smtpUrl);
  } else {
    fake = await startSmtpFake(opts.db, opts.logger, opts.clock);
    transport = nodemailer.createTransport({ host: '127.0.0.1', port: fake.port, secure: false, ignoreTLS: true });
  }
  // Once closed, a send fails at once and never reaches a mail server that is shutting down.
  let closed = false;
  const inFlight = new Set<Promise<unknown>>();
  return {
    local: fake !== null,
    async send(mail) {
      if (closed) throw new Error('mail is closed: the server is stopping');
      const headers = mail.hospitalId ? { [HOSPITAL_HEADER]: String(mail.hospitalId) } : undefined;
      const sending = transport.sendMail({ from: opts.from, to: mail.to, subject: mail.subject, text: mail.text, headers });
      inFlight.add(sending);
      try {
        const info = await sending;
        return { messageId: info.messageId };
      } finally {
        inFlight.delete(sending);
      }
    },
    async close() {
      if (closed) return;
      closed = true;
      // Messages already handed over finish their conversation before the mail server goes.
      await Promise.allSettled([...inFlight]);
      transport.close();
      await fake?.close();
    },
  };
}
