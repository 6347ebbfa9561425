import { describe, expect, it } from 'vitest';
import { CASE_EVENT_KINDS, CREW_EVENT_KINDS, eventPhrase, eventTitle } from '../../../shared/schemas/case-events';

describe('the words of a case’s steps', () => {
  it('gives every kind a title and a phrase', () => {
    for (const kind of CASE_EVENT_KINDS) {
      expect(eventTitle(kind).length, kind).toBeGreaterThan(3);
      expect(eventPhrase(kind).length, kind).toBeGreaterThan(3);
    }
  });

  it('lets the crew follow its own and the ED’s steps, never pages, escalations or reviews', () => {
    expect([...CREW_EVENT_KINDS].sort()).toEqual(['acknowledged', 'arrived', 'bay-assigned', 'cancelled', 'closed', 'level-decided', 'received', 'redirected', 'revised', 'team-at-bedside']);
  });

  it('still reads a kind it does not know', () => {
    expect(eventTitle('bed-requested')).toBe('Bed requested');
    expect(eventPhrase('bed-requested')).toBe('bed-requested');
    expect(eventTitle('toString')).toBe('ToString');
  });
});
