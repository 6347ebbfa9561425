import type { Knex } from 'knex';
import type { Logger } from 'pino';
import type { SentMessage } from '../../../shared/schemas/paging';
import type { Clock } from '../../deps';
import type { Mailer, OutgoingMail } from '../../mail';

// Everything Plumbline sends, e-mail and SMS, with each message's delivery state: the admin's
// "Messages sent" page reads it, and the board's paging block reads the failures.

const MAX_TEXT = 20_000;

/** The mailer every feature uses: each e-mail is recorded as sent, or failed with the reason. */
export function recordingMailer(inner: Mailer, db: Knex, clock: Clock, logger: Logger): Mailer {
  const record = async (mail: OutgoingMail, state: string, error: string | null, providerId: string | null) => {
    const at = clock.now();
    try {
      const [row] = await db('outbound_messages').insert({
        hospital_id: mail.hospitalId ?? null, case_id: mail.record?.caseId ?? null, user_id: mail.record?.userId ?? null, tier: mail.record?.tier ?? null, round: mail.record?.round ?? null, fallback_of: mail.record?.fallbackOf ?? null, channel: 'email', recipient: mail.to.join(', '), subject: mail.subject.slice(0, 500),
        body: mail.text.slice(0, MAX_TEXT), provider_id: providerId?.slice(0, 64) ?? null, state, error, created_at: at, updated_at: at,
      }).returning('id');
      return row.id as number;
    } catch (err) {
      logger.error({ err }, 'a sent e-mail could not be recorded');
      return null;
    }
  };
  return {
    get local() { return inner.local; },
    async send(mail) {
      try {
        const sent = await inner.send(mail);
        await record(mail, 'sent', null, sent.messageId);
        return sent;
      } catch (err) {
        await record(mail, 'failed', String((err as Error)?.message ?? err).slice(0, 300), null);
        throw err;
      }
    },
    close: () => inner.close(),
  };
}

/** The messages sent for these hospitals, newest first. */
export async function listMessages(db: Knex, opts: { hospitalIds: number[]; limit: number }): Promise<SentMessage[]> {
  const rows = await db('outbound_messages as m')
    .leftJoin('cases as c', 'c.id', 'm.case_id')
    .leftJoin('users as u', 'u.id', 'm.user_id')
    .whereIn('m.hospital_id', opts.hospitalIds)
    .orderBy('m.id', 'desc')
    .limit(opts.limit)
    .select('m.*', 'c.case_number', 'u.name as user_name');
  return rows.map((r) => ({
    id: r.id, channel: r.channel, caseId: r.case_id, caseNumber: r.case_number ?? null, recipient: r.recipient, name: r.user_name ?? null,
    subject: r.subject, body: r.body, state: r.state, error: r.error, tier: r.tier, round: r.round, fallbackOf: r.fallback_of,
    createdAt: Number(r.created_at), updatedAt: Number(r.updated_at),
  }));
}
