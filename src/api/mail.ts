import { apiGet } from './http';

export interface SentMail { id: number; receivedAt: number; sender: string; recipients: string[]; subject: string; text: string }

/** What the built-in mail fake received; `local` is false when an outside SMTP server is used. */
export const listSentMail = (limit = 200) => apiGet<{ local: boolean; messages: SentMail[] }>(`/api/mail?limit=${limit}`);
