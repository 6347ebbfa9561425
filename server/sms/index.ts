import twilio from 'twilio';
import type RequestClient from 'twilio/lib/base/RequestClient';
import type { Logger } from 'pino';
import { startSmsFake, type SmsFake } from './fake';

// SMS through the provider's official SDK. With an account configured it talks to the provider;
// without one it talks, over HTTP, to the local fake started here, pointed there by the SDK's own
// HTTP-client option (a RequestClient that sends the same requests to another origin).

export interface SmsConfig { accountSid: string; authToken: string; from: string }

export interface SentSms { sid: string; status: string }

export interface SmsSender {
  send(to: string, body: string, statusCallback: string): Promise<SentSms>;
  /** True when the local fake receives what is sent. */
  readonly local: boolean;
  /** The local fake's page for testers, when it runs. */
  readonly fakeUrl: string | null;
  readonly fake: SmsFake | null;
  /** The account secret webhook signatures are checked against. */
  readonly authToken: string;
  readonly from: string;
  close(): Promise<void>;
}

/** The SDK's own HTTP client, with every request sent to `origin` instead of the provider's hosts. */
export class RedirectingRequestClient extends twilio.RequestClient {
  constructor(private readonly origin: string) {
    super({ timeout: 10_000 });
  }
  override request<TData>(opts: RequestClient.RequestOptions<TData>) {
    const target = new URL(opts.uri);
    return super.request<TData>({ ...opts, uri: this.origin + target.pathname + target.search });
  }
}

/** The sender number used with the fake: from the Australian range set aside for fiction (ACMA; from memory). */
export const LOCAL_SENDER = '+61491570006';

export async function createSmsSender(opts: { config: SmsConfig | null; publicUrl: string; logger: Logger }): Promise<SmsSender> {
  let fake: SmsFake | null = null;
  let account: SmsConfig;
  let client: twilio.Twilio;
  if (opts.config) {
    account = opts.config;
    client = twilio(account.accountSid, account.authToken);
  } else {
    fake = await startSmsFake({ inboundUrl: () => `${opts.publicUrl}/webhooks/sms/inbound`, sender: LOCAL_SENDER, logger: opts.logger });
    account = { accountSid: fake.accountSid, authToken: fake.authToken, from: LOCAL_SENDER };
    client = twilio(account.accountSid, account.authToken, { httpClient: new RedirectingRequestClient(fake.url) });
  }
  return {
    local: fake !== null,
    fakeUrl: fake?.url ?? null,
    fake,
    authToken: account.authToken,
    from: account.from,
    async send(to, body, statusCallback) {
      const message = await client.messages.create({ to, from: account.from, body, statusCallback });
      return { sid: message.sid, status: message.status };
    },
    async close() {
      await fake?.close();
    },
  };
}
