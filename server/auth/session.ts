import session from 'express-session';
import { ConnectSessionKnexStore } from 'connect-session-knex';
import type { Knex } from 'knex';
import type { Role } from '../../shared/roles';

declare module 'express-session' {
  interface SessionData {
    userId: number;
    /** Roles the outside issuer sent in a claim, when it sends one; otherwise our table decides. */
    claimedRoles?: Role[];
    idToken?: string;
    signIn?: { state: string; nonce: string; verifier: string; returnTo: string };
  }
}

export const SESSION_COOKIE = 'plumbline.sid';

export function createSessionMiddleware(opts: { db: Knex; secret: string; secure: boolean }) {
  const store = new ConnectSessionKnexStore({ knex: opts.db, tableName: 'sessions', createTable: false, cleanupInterval: 15 * 60_000 });
  return session({
    name: SESSION_COOKIE,
    secret: opts.secret,
    store,
    resave: false,
    saveUninitialized: false,
    rolling: true,
    proxy: opts.secure,
    cookie: { httpOnly: true, sameSite: 'lax', secure: opts.secure, maxAge: 12 * 3600_000 },
  });
}

/** Ends every session a user holds, as when an administrator deactivates them. */
export async function endSessionsOf(db: Knex, userId: number): Promise<number> {
  const userIdOfSession = db.client.config.client === 'pg' ? "(sess->>'userId')::int" : "json_extract(sess, '$.userId')";
  return db('sessions').whereRaw(`${userIdOfSession} = ?`, [userId]).delete();
}
