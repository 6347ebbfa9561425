// Conversions for the units a crew types; the engine works in metres and whole GCS points.

/** Exact by definition of the international foot [source: standard mechanics]. */
export const METRES_PER_FOOT = 0.3048;
/** One storey = 10 feet [source: 2011 guideline, Sasser 2012]; some studies use 12 ft [trade]. */
export const FEET_PER_STOREY = 10;

// Rounded to the micrometre so that 10 ft lands exactly on the 3.048 m threshold.
const roundMicro = (metres: number): number => Math.round(metres * 1e6) / 1e6;

export function feetToMetres(feet: number): number {
  return roundMicro(feet * METRES_PER_FOOT);
}

export function metresToFeet(metres: number): number {
  return Math.round((metres / METRES_PER_FOOT) * 1e6) / 1e6;
}

export function storeysToMetres(storeys: number, feetPerStorey: number = FEET_PER_STOREY): number {
  return roundMicro(storeys * feetPerStorey * METRES_PER_FOOT);
}

export interface GcsComponents {
  eye?: number | null;
  verbal?: number | null;
  motor?: number | null;
}

/** The total only when all three parts are known: a partial sum would read the gap as normal. */
export function gcsTotalOf(gcs: GcsComponents | null | undefined): number | null {
  if (!gcs || gcs.eye == null || gcs.verbal == null || gcs.motor == null) return null;
  return gcs.eye + gcs.verbal + gcs.motor;
}
