import { describe, expect, it } from 'vitest';
import { inOrderMade, nextAttempt, type OutboxEntry } from '../../../src/offline/outbox-db';
import { PreAlert } from '../../../shared/schemas/cases';

// The outbox's own rules (the product's, no source): pre-alerts go in the order they were made,
// and every try sends the same pre-alert under the same id, which the server uses to answer a
// second copy with the case the first made.
const T0 = Date.UTC(2026, 11, 4, 3, 0);
const preAlert = (clientId: string, ageYears: number) =>
  PreAlert.parse({ clientId, hospitalId: 1, clinical: { ageYears, fall: { heightM: 2 }, vitals: { sbp: 130 } } });
/** An entry as the outbox makes it: the pre-alert's own id, not tried yet. */
const newEntry = (userId: number, payload: PreAlert, title: string, createdAt: number): OutboxEntry =>
  ({ clientId: payload.clientId, userId, payload, title, createdAt, attempts: 0, lastAttemptAt: null, rejected: null });

const first = newEntry(11, preAlert('6f1c2a4e-2b7d-4c1e-9a53-0d8e4f7b1a01', 81), 'Alderwick General · Medic 11 · 81 y, fell 2 m', T0);
const second = newEntry(11, preAlert('0a9b8c7d-6e5f-4a3b-8c2d-1e0f9a8b7c02', 34), 'Alderwick General · Medic 11 · 34 y, fell 2 m', T0 + 40_000);
const third = newEntry(11, preAlert('ffeeddcc-bbaa-4988-8776-655443322103', 6), 'Alderwick General · Medic 11 · 6 y, fell 2 m', T0 + 95_000);

describe('the outbox’s order and ids', () => {
  it('sends first what was made first, whatever order the device read them in', () => {
    expect(inOrderMade([third, first, second]).map((e) => e.clientId)).toEqual([first.clientId, second.clientId, third.clientId]);
    expect(inOrderMade([second, third, first]).map((e) => e.createdAt)).toEqual([T0, T0 + 40_000, T0 + 95_000]);
  });

  it('keeps an entry’s place after failed tries: a retry does not move it to the back', () => {
    const retried = nextAttempt(nextAttempt(first, T0 + 100_000), T0 + 102_000);
    expect(inOrderMade([second, third, retried]).map((e) => e.clientId)).toEqual([first.clientId, second.clientId, third.clientId]);
  });

  it('keeps two pre-alerts made in the same millisecond in the order they were read', () => {
    const twin = newEntry(11, preAlert('12345678-1234-4abc-8def-123456789004', 50), 'twin', T0);
    expect(inOrderMade([first, twin]).map((e) => e.clientId)).toEqual([first.clientId, twin.clientId]);
    expect(inOrderMade([twin, first]).map((e) => e.clientId)).toEqual([twin.clientId, first.clientId]);
  });

  it('keeps the pre-alert’s own id, and the pre-alert, through every try', () => {
    expect(first.clientId).toBe('6f1c2a4e-2b7d-4c1e-9a53-0d8e4f7b1a01');
    const once = nextAttempt(first, T0 + 5_000);
    const twice = nextAttempt(once, T0 + 7_000);
    expect(twice).toMatchObject({ clientId: first.clientId, attempts: 2, lastAttemptAt: T0 + 7_000, createdAt: T0, userId: 11 });
    expect(twice.payload).toEqual(first.payload);
    expect(twice.payload.clientId).toBe(first.clientId);
    // The entry read from the device is left as it was; the try is a new copy to store.
    expect(first.attempts).toBe(0);
    expect(once.attempts).toBe(1);
  });
});
