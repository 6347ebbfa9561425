import type { Twilio } from 'twilio';
import type { Logger } from 'pino';
import { startSmsFake, type SmsFake } from './fake';

// SMS through the provider's official SDK. With an account configured it talks to the provider;
// without one it talks, over HTTP, to the local fake started here, pointed there by the SDK's own
// HTTP-client option (a RequestClient that sends the same requests to another origin).
// The SDK is large, so it is loaded at the first message or webhook, not at every start.

let sdk: Promise<typeof import('./sdk')> | null = null;
/** The provider's SDK (./sdk), loaded once, when first needed. */
export function twilioSdk(): Promise<typeof import('./sdk')> {
  sdk ??= import('./sdk');
  return sdk;
}

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


/** The sender number used with the fake: from the Australian range set aside for fiction (ACMA; from memory). */
export const LOCAL_SENDER = '+61491570006';

export async function createSmsSender(opts: { config: SmsConfig | null; publicUrl: string; logger: Logger }): Promise<SmsSender> {
  let fake: SmsFake | null = null;
  let account: SmsConfig;
  if (opts.config) {
    account = opts.config;
  } else {
    fake = await startSmsFake({ inboundUrl: () => `${opts.publicUrl}/webhooks/sms/inbound`, sender: LOCAL_SENDER, logger: opts.logger });
    account = { accountSid: fake.accountSid, authToken: fake.authToken, from: LOCAL_SENDER };
  }
  const fakeUrl = fake?.url ?? null;
  let client: Promise<Twilio> | null = null;
  const sdkClient = async (): Promise<Twilio> => {
    const { twilio, RedirectingRequestClient } = await twilioSdk();
    return fakeUrl ? twilio(account.accountSid, account.authToken, { httpClient: new RedirectingRequestClient(fakeUrl) }) : twilio(account.accountSid, account.authToken);
  };
  return {
    local: fake !== null,
    fakeUrl: fake?.url ?? null,
    fake,
    authToken: account.authToken,
    from: account.from,
    async send(to, body, statusCallback) {
      client ??= sdkClient();
      const message = await (await client).messages.create({ to, from: account.from, body, statusCallback });
      return { sid: message.sid, status: message.status };
    },
    async close() {
      await fake?.close();
    },
  };
}
