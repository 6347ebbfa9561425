import express, { Router, type Request, type Response } from 'express';
import type { AppDeps } from '../deps';
import { AppError } from '../errors';
import { recordReceipt, recordReply } from '../services/board/sms-paging';
import { twilioSdk } from '../sms';
import { SIGNATURE_HEADER } from '../sms/signature';

// The SMS provider's calls to us: delivery receipts and replies. No page of ours makes these
// requests, so they are outside the same-origin check; instead each one must carry the
// provider's signature of the URL and fields, checked with the SDK's own validator.

export function webhooksRouter(deps: AppDeps): Router {
  const router = Router();
  router.use('/webhooks/sms', express.urlencoded({ extended: false, limit: '64kb' }));

  const signed = async (req: Request): Promise<Record<string, string>> => {
    const signature = req.get(SIGNATURE_HEADER);
    const params = (req.body && typeof req.body === 'object' ? req.body : {}) as Record<string, string>;
    const { twilio } = await twilioSdk();
    if (!signature || !twilio.validateRequest(deps.sms.authToken, signature, deps.publicUrl + req.originalUrl, params)) {
      deps.logger.warn({ path: req.path }, 'an SMS webhook without a valid signature was refused');
      throw new AppError(403, 'bad_signature', 'The request is not signed by the SMS provider.');
    }
    return params;
  };
  const twiml = (res: Response) => res.type('text/xml').send('<?xml version="1.0" encoding="UTF-8"?><Response></Response>');

  router.post('/webhooks/sms/status', async (req, res) => {
    await recordReceipt(deps, await signed(req));
    res.status(204).end();
  });
  router.post('/webhooks/sms/inbound', async (req, res) => {
    await recordReply(deps, await signed(req));
    twiml(res);
  });
  return router;
}
