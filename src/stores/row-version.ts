// How the board and the crew's list take in copies of a case. Every change to a case raises its
// row version, so of two copies the higher version is the later truth. A broadcast and a reload
// can cross, so an older copy never replaces a newer one. A copy of the same version is taken:
// the version stays put when only a name shown in it changes (a renamed hospital or crew).

export interface Versioned {
  id: number;
  rowVersion: number;
}

/** What one arriving copy does to a screen's list. */
export type Arrival =
  /** The screen holds a newer copy: nothing changes. */
  | 'older'
  /** It replaces the copy held. */
  | 'updated'
  /** It is new to the screen. */
  | 'arrived'
  /** It no longer belongs on the screen (closed, cancelled, sent elsewhere) and leaves it. */
  | 'left'
  /** It does not belong on the screen, which never held it. */
  | 'absent';

/** Of the copy held and the one arriving, the one to keep. */
export function newerCopy<T extends Versioned>(held: T | undefined, incoming: T): T {
  return held !== undefined && held.rowVersion > incoming.rowVersion ? held : incoming;
}

/** What an arriving copy does, given the copy held (if any) and whether the case belongs on the screen. */
export function arrivalOf(held: Versioned | undefined, incoming: Versioned, belongs: boolean): Arrival {
  if (held !== undefined && held.rowVersion > incoming.rowVersion) return 'older';
  if (!belongs) return held !== undefined ? 'left' : 'absent';
  return held !== undefined ? 'updated' : 'arrived';
}

/**
 * A reload's list laid over the copies a screen holds: every case the server lists, in its order,
 * each as the newer of the two copies. A case the server no longer lists is not kept.
 */
export function mergeReload<T extends Versioned>(held: Iterable<T>, fresh: readonly T[]): Map<number, T> {
  const heldById = new Map<number, T>();
  for (const c of held) heldById.set(c.id, c);
  return new Map(fresh.map((c) => [c.id, newerCopy(heldById.get(c.id), c)]));
}
