import { describe, expect, it } from 'vitest';
import { mergeReload, newerCopy } from '../../../src/stores/row-version';

// The product's own rule (no source): every change to a case raises its row version, so of two
// copies of a case the higher version is the later one. Hand-made copies: only what the rule reads,
// and a name to tell the copies apart.
interface Copy { id: number; rowVersion: number; hospital: string }
const copy = (id: number, rowVersion: number, hospital = 'Alderwick General'): Copy => ({ id, rowVersion, hospital });

describe('one row-version merge for the board and the crew’s list', () => {
  it('never lets an older copy overwrite a newer one', () => {
    const held = copy(7, 5);
    expect(newerCopy(held, copy(7, 4))).toBe(held);
    expect(newerCopy(held, copy(7, 1, 'Harrow Vale'))).toBe(held);
    // The same held against a reload that carries the older copy.
    expect(mergeReload([held], [copy(7, 4, 'reload')]).get(7)).toBe(held);
  });

  it('takes a newer copy in place of the one held', () => {
    const newer = copy(7, 6);
    expect(newerCopy(copy(7, 5), newer)).toBe(newer);
    expect(newerCopy(copy(7, 5), copy(7, 60))).toEqual(copy(7, 60));
  });

  it('takes a copy of the same version: a renamed hospital keeps the case’s version', () => {
    const renamed = copy(7, 5, 'Alderwick General Hospital');
    expect(newerCopy(copy(7, 5), renamed)).toBe(renamed);
    expect(mergeReload([copy(7, 5)], [renamed]).get(7)).toBe(renamed);
  });

  it('takes a case the screen has never held', () => {
    const arriving = copy(8, 1);
    expect(newerCopy(undefined, arriving)).toBe(arriving);
  });

  it('lays a reload over the copies held: newer kept, older replaced, new ones added, unlisted ones dropped', () => {
    const heldNewer = copy(1, 9, 'held');
    const held = [heldNewer, copy(2, 3, 'held'), copy(3, 4, 'held'), copy(4, 1, 'held')];
    // Case 1's broadcast crossed the reload; case 4 has closed and the server no longer lists it.
    const fresh = [copy(3, 4, 'reload'), copy(1, 8, 'reload'), copy(2, 4, 'reload'), copy(5, 1, 'reload')];
    const merged = mergeReload(held, fresh);
    expect([...merged.keys()]).toEqual([3, 1, 2, 5]);
    expect(merged.get(1)).toBe(heldNewer);
    expect(merged.get(2)).toEqual(copy(2, 4, 'reload'));
    expect(merged.get(3)).toEqual(copy(3, 4, 'reload'));
    expect(merged.get(5)).toEqual(copy(5, 1, 'reload'));
    expect(merged.has(4)).toBe(false);
  });

  it('keeps nothing from an empty reload, and everything from a reload over an empty screen', () => {
    expect(mergeReload([copy(1, 2)], []).size).toBe(0);
    const fresh = [copy(1, 1), copy(2, 1)];
    expect([...mergeReload([], fresh).values()]).toEqual(fresh);
  });
});
