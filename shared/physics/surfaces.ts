import type { Surface } from '../schemas/clinical-options';

export interface StoppingDistance {
  /** Metres over which the body comes to rest, body deformation included; null where no figure makes sense. */
  metres: number | null;
  estimate: true;
}

// Rough stopping distances per landing surface, written from memory and not measured [memory].
// They only scale the deceleration shown as context; a feet-first landing or a roll lengthens the
// distance and cuts the force [trade], which no table can know.
export const STOPPING_DISTANCE: Readonly<Record<Surface, StoppingDistance>> = {
  concrete: { metres: 0.02, estimate: true },
  asphalt: { metres: 0.02, estimate: true },
  'tile-stone': { metres: 0.02, estimate: true },
  stairs: { metres: 0.02, estimate: true },
  wood: { metres: 0.03, estimate: true },
  earth: { metres: 0.05, estimate: true },
  grass: { metres: 0.06, estimate: true },
  sand: { metres: 0.1, estimate: true },
  vehicle: { metres: 0.15, estimate: true },
  snow: { metres: 0.3, estimate: true },
  water: { metres: 0.3, estimate: true },
  other: { metres: null, estimate: true },
  unknown: { metres: null, estimate: true },
};
