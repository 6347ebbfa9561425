import twilio from 'twilio';
import type RequestClient from 'twilio/lib/base/RequestClient';

// The provider's SDK and what is built on it. This module is imported only when the first
// message is sent or the first webhook checked (see twilioSdk in ./index), since the SDK costs
// about 25 MB of memory and half a second of loading that a start should not pay.

export { twilio };

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
