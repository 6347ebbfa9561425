import { createHmac } from 'node:crypto';

/**
 * How the SMS provider signs the requests it makes to us (status callbacks, inbound messages):
 * the full URL it calls, then every form field sorted by name as name followed by value, run
 * through HMAC-SHA1 with the account's secret and sent base64 in the X-Twilio-Signature header.
 * Only the local fake signs with this; our own routes check signatures with the SDK's validator.
 */
export function providerSignature(secret: string, url: string, params: Record<string, string>): string {
  const data = Object.keys(params).sort().reduce((acc, key) => acc + key + params[key], url);
  return createHmac('sha1', secret).update(Buffer.from(data, 'utf-8')).digest('base64');
}

export const SIGNATURE_HEADER = 'X-Twilio-Signature';
