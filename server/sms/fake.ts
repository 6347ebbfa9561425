import { randomBytes } from 'node:crypto';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import express, { type Request, type Response } from 'express';
import type { Logger } from 'pino';
import { isValidPhoneNumber } from 'libphonenumber-js';
import { SIGNATURE_HEADER, providerSignature } from './signature';

// A local stand-in for the hosted SMS service, used when no account is configured. It speaks the
// service's REST API as the SDK expects it (form-encoded bodies, Basic auth, the message resource
// in JSON, its error bodies), calls each message's StatusCallback URL with the states a handset
// delivery goes through, and signs those calls as the service does. Its own page shows what was
// sent and lets a tester answer as any paged number, so the whole loop runs on one machine.

export interface FakeMessage {
  sid: string;
  to: string;
  from: string;
  body: string;
  status: 'queued' | 'sent' | 'delivered' | 'undelivered' | 'failed';
  errorCode: number | null;
  statusCallback: string | null;
  createdAt: number;
  direction: 'outbound-api' | 'inbound';
}

export interface SmsFake {
  url: string;
  accountSid: string;
  authToken: string;
  messages: FakeMessage[];
  /** Numbers whose handsets are off: messages to them end undelivered (error 30003). */
  unreachable: Set<string>;
  /** Sends a reply from `from` to the inbound webhook, signed; returns the webhook's status. */
  reply(from: string, body: string): Promise<number>;
  close(): Promise<void>;
}

const API = '/2010-04-01';
const sidOf = (prefix: string) => prefix + randomBytes(16).toString('hex');
const rfc2822 = (at: number) => new Date(at).toUTCString().replace('GMT', '+0000');
const escapeHtml = (s: string) => s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);

/** The service's error body. */
function apiError(res: Response, status: number, code: number, message: string) {
  res.status(status).json({ code, message, more_info: `https://www.twilio.com/docs/errors/${code}`, status });
}

export async function startSmsFake(opts: { inboundUrl: () => string; sender: string; logger: Logger; stepMs?: number }): Promise<SmsFake> {
  const accountSid = sidOf('AC');
  const authToken = randomBytes(16).toString('hex');
  const stepMs = opts.stepMs ?? 300;
  const messages: FakeMessage[] = [];
  const unreachable = new Set<string>();
  const timers = new Set<NodeJS.Timeout>();

  async function signedPost(url: string, params: Record<string, string>): Promise<number> {
    const res = await fetch(url, {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', [SIGNATURE_HEADER]: providerSignature(authToken, url, params), 'user-agent': 'TwilioProxy/1.1' },
      body: new URLSearchParams(params).toString(),
    });
    await res.arrayBuffer();
    return res.status;
  }

  const resource = (m: FakeMessage) => ({
    account_sid: accountSid,
    api_version: '2010-04-01',
    body: m.body,
    date_created: rfc2822(m.createdAt),
    date_sent: m.status === 'queued' ? null : rfc2822(m.createdAt),
    date_updated: rfc2822(Date.now()),
    direction: m.direction,
    error_code: m.errorCode,
    error_message: null,
    from: m.from,
    messaging_service_sid: null,
    num_media: '0',
    num_segments: String(Math.max(1, Math.ceil(m.body.length / 153))),
    price: null,
    price_unit: 'USD',
    sid: m.sid,
    status: m.status,
    subresource_uris: { media: `${API}/Accounts/${accountSid}/Messages/${m.sid}/Media.json` },
    to: m.to,
    uri: `${API}/Accounts/${accountSid}/Messages/${m.sid}.json`,
  });

  /** The states a message passes through, each told to its StatusCallback after a short step. */
  function progress(m: FakeMessage) {
    const steps: Array<Pick<FakeMessage, 'status' | 'errorCode'>> = unreachable.has(m.to) ? [{ status: 'sent', errorCode: null }, { status: 'undelivered', errorCode: 30003 }] : [{ status: 'sent', errorCode: null }, { status: 'delivered', errorCode: null }];
    let i = 0;
    const next = () => {
      const step = steps[i++];
      if (!step) return;
      Object.assign(m, step);
      const done = () => {
        if (i < steps.length) {
          const t = setTimeout(() => { timers.delete(t); next(); }, stepMs);
          timers.add(t);
        }
      };
      if (!m.statusCallback) return done();
      const params: Record<string, string> = { AccountSid: accountSid, ApiVersion: '2010-04-01', From: m.from, MessageSid: m.sid, MessageStatus: m.status, SmsSid: m.sid, SmsStatus: m.status, To: m.to };
      if (m.errorCode != null) params.ErrorCode = String(m.errorCode);
      signedPost(m.statusCallback, params).catch((err: unknown) => opts.logger.warn({ err, sid: m.sid }, 'SMS fake: status callback failed')).finally(done);
    };
    const t = setTimeout(() => { timers.delete(t); next(); }, stepMs);
    timers.add(t);
  }

  async function reply(from: string, body: string): Promise<number> {
    const sid = sidOf('SM');
    messages.push({ sid, to: opts.sender, from, body, status: 'delivered', errorCode: null, statusCallback: null, createdAt: Date.now(), direction: 'inbound' });
    return signedPost(opts.inboundUrl(), {
      AccountSid: accountSid, ApiVersion: '2010-04-01', Body: body, From: from, MessageSid: sid, NumMedia: '0', NumSegments: '1', SmsMessageSid: sid, SmsSid: sid, SmsStatus: 'received', To: opts.sender,
    });
  }

  const app = express();
  app.disable('x-powered-by');
  app.use(express.urlencoded({ extended: false, limit: '64kb' }));

  const authorised = (req: Request, res: Response) => {
    const [scheme, encoded] = (req.get('authorization') ?? '').split(' ');
    const [user, pass] = scheme === 'Basic' && encoded ? Buffer.from(encoded, 'base64').toString().split(':') : [];
    if (user === accountSid && pass === authToken && req.params.account === accountSid) return true;
    res.set('WWW-Authenticate', 'Basic realm="Twilio API"');
    apiError(res, 401, 20003, 'Authenticate');
    return false;
  };

  app.post(`${API}/Accounts/:account/Messages.json`, (req, res) => {
    if (!authorised(req, res)) return;
    const { To: to, From: from, Body: body, StatusCallback: statusCallback } = req.body ?? {};
    if (!to) return apiError(res, 400, 21604, "A 'To' phone number is required.");
    if (!isValidPhoneNumber(String(to))) return apiError(res, 400, 21211, `The 'To' number ${to} is not a valid phone number.`);
    if (from !== opts.sender) return apiError(res, 400, 21606, `The From phone number ${from} is not a valid, SMS-capable inbound phone number or short code for your account.`);
    if (!body) return apiError(res, 400, 21602, 'Message body is required.');
    if (String(body).length > 1600) return apiError(res, 400, 21617, 'The concatenated message body exceeds the 1600 character limit.');
    const m: FakeMessage = { sid: sidOf('SM'), to, from, body, status: 'queued', errorCode: null, statusCallback: statusCallback || null, createdAt: Date.now(), direction: 'outbound-api' };
    messages.push(m);
    progress(m);
    res.status(201).json(resource(m));
  });

  app.get(`${API}/Accounts/:account/Messages/:sid.json`, (req, res) => {
    if (!authorised(req, res)) return;
    const m = messages.find((x) => x.sid === req.params.sid);
    if (!m) return apiError(res, 404, 20404, `The requested resource ${req.path} was not found`);
    res.json(resource(m));
  });

  // The tester's phone: what was sent, and a form to answer as any number that was paged.
  app.get('/', (req, res) => {
    const numbers = [...new Set(messages.filter((m) => m.direction === 'outbound-api').map((m) => m.to))];
    const rows = [...messages].reverse().map((m) => `<tr><td>${new Date(m.createdAt).toISOString().slice(11, 19)}</td><td>${m.direction === 'inbound' ? 'reply' : 'sent'}</td><td>${escapeHtml(m.from)}</td><td>${escapeHtml(m.to)}</td><td class="body">${escapeHtml(m.body)}</td><td>${m.status}${m.errorCode ? ` (${m.errorCode})` : ''}</td></tr>`).join('');
    const note = typeof req.query.sent === 'string' ? `<p role="status">${escapeHtml(req.query.sent)}</p>` : '';
    res.type('html').send(`<!doctype html><html lang="en"><head><meta charset="utf-8"><title>Local SMS service</title><meta name="viewport" content="width=device-width, initial-scale=1">
<style>body{font:18px/1.5 system-ui,sans-serif;margin:1.5rem;color:#1b1b1b}table{border-collapse:collapse;width:100%}th,td{text-align:left;padding:.4rem .6rem;border-bottom:1px solid #999;vertical-align:top}td.body{white-space:pre-wrap}
label{display:block;font-weight:700;margin-top:.8rem}select,textarea,input,button{font:inherit;min-height:44px}textarea{width:100%;max-width:40rem}button{margin-top:.8rem;padding:0 1.2rem;background:#0b4f6c;color:#fff;border:0;border-radius:4px}
:focus-visible{outline:3px solid #b35c00;outline-offset:2px}</style></head><body><main>
<h1>Local SMS service</h1><p>Messages the local stand-in for the SMS provider received from Plumbline, newest first. Nothing leaves this machine.</p>${note}
<h2>Answer as a paged phone</h2>
<form method="post" action="/phone/replies"><label for="from">From number</label><select id="from" name="from">${numbers.map((n) => `<option>${escapeHtml(n)}</option>`).join('')}</select>
<label for="body">Reply</label><textarea id="body" name="body" rows="2">1</textarea><button type="submit">Send reply</button></form>
<h2>Messages</h2><table><thead><tr><th scope="col">Time (UTC)</th><th scope="col">Kind</th><th scope="col">From</th><th scope="col">To</th><th scope="col">Text</th><th scope="col">State</th></tr></thead><tbody>${rows}</tbody></table>
<h2>Switch a handset off</h2><form method="post" action="/phone/unreachable"><label for="number">Number (E.164)</label><input id="number" name="number" autocomplete="off"><button type="submit">Make unreachable</button></form>
</main></body></html>`);
  });
  app.post('/phone/replies', async (req, res) => {
    const from = String(req.body?.from ?? '');
    const body = String(req.body?.body ?? '').slice(0, 1600);
    if (!isValidPhoneNumber(from) || !body.trim()) return res.redirect(303, `/?sent=${encodeURIComponent('Choose a number and write a reply.')}`);
    const status = await reply(from, body).catch(() => 0);
    res.redirect(303, `/?sent=${encodeURIComponent(status >= 200 && status < 300 ? `Reply from ${from} delivered to Plumbline.` : `Plumbline refused the reply (HTTP ${status}).`)}`);
  });
  app.post('/phone/unreachable', (req, res) => {
    const number = String(req.body?.number ?? '');
    if (isValidPhoneNumber(number)) unreachable.add(number);
    res.redirect(303, `/?sent=${encodeURIComponent(`${number} is now unreachable.`)}`);
  });

  const server: Server = createServer(app);
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://127.0.0.1:${port}`,
    accountSid,
    authToken,
    messages,
    unreachable,
    reply,
    close: async () => {
      timers.forEach(clearTimeout);
      server.closeAllConnections();
      await new Promise<void>((resolve) => server.close(() => resolve()));
    },
  };
}
