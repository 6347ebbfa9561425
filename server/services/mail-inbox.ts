import type { Knex } from 'knex';

export interface StoredMail { id: number; receivedAt: number; sender: string; recipients: string[]; subject: string; text: string }

/**
 * What went to the notification lists of these hospitals. Mail carries no hospital of its own,
 * so a message counts as a hospital's when one of its recipients is on one of its lists now;
 * an administrator of another hospital must not read one county's pages about its patients.
 */
export async function listMail(db: Knex, opts: { limit: number; hospitalIds: number[] }): Promise<StoredMail[]> {
  const rows = await db('mail_messages as m')
    .whereExists((q) =>
      q.select(db.raw('1')).from(db.raw('json_each(m.recipients) as r'))
        .whereRaw('lower(r.value) in ?', [db('notification_lists').whereIn('hospital_id', opts.hospitalIds).select(db.raw('lower(email)'))]),
    )
    .orderBy('m.id', 'desc')
    .limit(opts.limit)
    .select('m.*');
  return rows.map((row) => ({
    id: row.id,
    receivedAt: Number(row.received_at),
    sender: row.sender,
    recipients: JSON.parse(row.recipients),
    subject: row.subject,
    text: row.text,
  }));
}
