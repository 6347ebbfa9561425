// How the board and the crew's list take in copies of a case. Every change to a case raises its
// row version, so of two copies the higher version is the later truth. A broadcast and a reload
// can cross, so an older copy never replaces a newer one. A copy of the same version is taken:
// the version stays put when only a name shown in it changes (a renamed hospital or crew).

export interface Versioned {
  id: number;
  rowVersion: number;
}

/** Of the copy held and the one arriving, the one to keep: the arriving one unless the held one is newer. */
export function newerCopy<T extends Versioned>(held: T | undefined, incoming: T): T {
  return held !== undefined && held.rowVersion > incoming.rowVersion ? held : incoming;
}

/**
 * A reload's list laid over the copies a screen holds: every case the server lists, in its order,
 * each as the newer of the two copies. A case the server no longer lists is not kept.
 */
export function mergeReload<T extends Versioned>(held: readonly T[], fresh: readonly T[]): Map<number, T> {
  const heldById = new Map(held.map((c) => [c.id, c]));
  return new Map(fresh.map((c) => [c.id, newerCopy(heldById.get(c.id), c)]));
}
