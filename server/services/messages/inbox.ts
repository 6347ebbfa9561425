import type { Knex } from 'knex';

export interface StoredMail { id: number; receivedAt: number; sender: string; recipients: string[]; subject: string; text: string }

/** What was sent for these hospitals: an administrator must not read another hospital's pages. */
export async function listMail(db: Knex, opts: { limit: number; hospitalIds: number[] }): Promise<StoredMail[]> {
  const rows = await db('mail_messages as m').whereIn('m.hospital_id', opts.hospitalIds).orderBy('m.id', 'desc').limit(opts.limit).select('m.*');
  return rows.map((row) => ({
    id: row.id,
    receivedAt: Number(row.received_at),
    sender: row.sender,
    recipients: JSON.parse(row.recipients),
    subject: row.subject,
    text: row.text,
  }));
}
