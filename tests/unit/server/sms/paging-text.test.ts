import { describe, expect, it } from 'vitest';
import twilio from 'twilio';
import { answerOf } from '../../../../server/services/board/sms-paging';
import { providerSignature } from '../../../../server/sms/signature';
import { MobileNumber, PagingEntry } from '../../../../shared/schemas/paging';

describe('a reply to a page', () => {
  it('reads "1" as on my way and "2" as can\'t come, with or without words after; anything else is a message', () => {
    expect(['1', ' 1 ', '1 five minutes', '1.'].map(answerOf)).toEqual(['coming', 'coming', 'coming', 'coming']);
    expect(['2', '2 in theatre'].map(answerOf)).toEqual(['declined', 'declined']);
    expect(['12', 'on my way', '', '3', 'yes 1'].map(answerOf)).toEqual(['text', 'text', 'text', 'text', 'text']);
  });
});

describe('a mobile number for paging', () => {
  // From the Australian range set aside for fiction (ACMA; from memory).
  it('takes E.164 that the numbering plan knows, and names the bad entry otherwise', () => {
    expect(MobileNumber.parse(' +61491570156 ')).toBe('+61491570156');
    for (const bad of ['0491 570 156', '+61 491 570 156', '+6149', '+0491570156', 'none']) {
      const result = MobileNumber.safeParse(bad);
      expect(result.success, bad).toBe(false);
      expect(result.error!.issues[0].message).toContain(`"${bad}"`);
    }
  });

  it('a list entry is a person, an address or a number, and nothing else', () => {
    expect(PagingEntry.safeParse({ kind: 'sms', value: '+61491570157' }).success).toBe(true);
    expect(PagingEntry.safeParse({ kind: 'email', value: 'not-an-address' }).success).toBe(false);
    expect(PagingEntry.safeParse({ kind: 'fax', value: '123' }).success).toBe(false);
  });
});

describe('the provider\'s webhook signature, as the local fake makes it', () => {
  const url = 'https://plumbline.example.org/webhooks/sms/inbound';
  const params = { Body: '1', From: '+61491570156', MessageSid: 'SM' + 'a'.repeat(32), To: '+61491570006' };

  it('is accepted by the SDK\'s own validator, and refused once a field, the URL or the secret differs', () => {
    const signature = providerSignature('secret-one', url, params);
    expect(twilio.validateRequest('secret-one', signature, url, params)).toBe(true);
    expect(twilio.validateRequest('secret-one', signature, url, { ...params, Body: '2' })).toBe(false);
    expect(twilio.validateRequest('secret-one', signature, url.replace('inbound', 'status'), params)).toBe(false);
    expect(twilio.validateRequest('secret-two', signature, url, params)).toBe(false);
  });
});
