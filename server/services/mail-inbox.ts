import type { Knex } from 'knex';

export interface StoredMail { id: number; receivedAt: number; sender: string; recipients: string[]; subject: string; text: string }

export async function listMail(db: Knex, opts: { limit: number }): Promise<StoredMail[]> {
  const rows = await db('mail_messages').orderBy('id', 'desc').limit(opts.limit);
  return rows.map((row) => ({
    id: row.id,
    receivedAt: Number(row.received_at),
    sender: row.sender,
    recipients: JSON.parse(row.recipients),
    subject: row.subject,
    text: row.text,
  }));
}
