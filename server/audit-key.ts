import { createHmac, randomBytes } from 'node:crypto';
import { chmodSync, existsSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';

// The audit chain's key lives outside the database: in AUDIT_KEY, or in a file beside it that
// only the server's own account can read. Someone who copies or edits the database file alone
// cannot forge a row, because each row's hash is an HMAC under this key.

export const AUDIT_KEY_FILE = 'audit-key';
const MIN_KEY_CHARS = 32;

/** The key from AUDIT_KEY, else from DATA_DIR/audit-key, made (owner-only) when it is missing. */
export function loadAuditKey(dataDir: string, env: NodeJS.ProcessEnv = process.env): Buffer {
  const fromEnv = env.AUDIT_KEY;
  if (fromEnv) {
    if (fromEnv.length < MIN_KEY_CHARS) throw new Error(`AUDIT_KEY must be at least ${MIN_KEY_CHARS} characters (for example 32 random bytes, base64)`);
    return Buffer.from(fromEnv, 'utf8');
  }
  const file = join(dataDir, AUDIT_KEY_FILE);
  if (!existsSync(file)) {
    writeFileSync(file, randomBytes(32).toString('base64url'), { mode: 0o600, flag: 'wx' });
  } else if ((statSync(file).mode & 0o077) !== 0) {
    // Readable by the group or others: the key is only as private as this file.
    chmodSync(file, 0o600);
  }
  const text = readFileSync(file, 'utf8').trim();
  if (text.length < MIN_KEY_CHARS) throw new Error(`${file} holds no usable audit key (at least ${MIN_KEY_CHARS} characters)`);
  return Buffer.from(text, 'utf8');
}

/** A short public name for a key, so a check can say "another key" rather than "changed". */
export function auditKeyId(key: Buffer): string {
  return createHmac('sha256', key).update('plumbline audit key id').digest('hex').slice(0, 16);
}
