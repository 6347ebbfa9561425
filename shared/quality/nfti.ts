// Need For Trauma Intervention, Roden-Foreman JW et al., J Trauma Nurs 2017;24(3) [source]: positive
// when any component is met. Times are from ED arrival. Field conventions:
//   absent (undefined)  the registry gave nothing: unknown;
//   a time field null   the event did not happen (no operation, no ICU stay, survived…);
//   redCellsWithin4h null  unknown, like absent.

export interface NftiComponents {
  redCellsWithin4h?: boolean | null;
  /** ED arrival to the operating room; met within 90 min. */
  minutesToOperatingRoom?: number | null;
  /** ED arrival to interventional radiology; met at any time. */
  minutesToInterventionalRadiology?: number | null;
  /** ICU stay after admission from the ED; met at 3 days or more. */
  icuDays?: number | null;
  /** ED arrival to mechanical ventilation that was not for a procedure; met within 3 days (72 h). */
  hoursToVentilation?: number | null;
  /** ED arrival to death; met within 60 h. */
  hoursToDeath?: number | null;
}

export type NftiComponent = keyof NftiComponents;

/** The components met, in the order the definition lists them. */
export function nftiMet(c: NftiComponents): NftiComponent[] {
  const met: NftiComponent[] = [];
  if (c.redCellsWithin4h === true) met.push('redCellsWithin4h');
  if (c.minutesToOperatingRoom != null && c.minutesToOperatingRoom <= 90) met.push('minutesToOperatingRoom'); // [source: Roden-Foreman 2017]
  if (c.minutesToInterventionalRadiology != null) met.push('minutesToInterventionalRadiology'); // [source: Roden-Foreman 2017]
  if (c.icuDays != null && c.icuDays >= 3) met.push('icuDays'); // [source: Roden-Foreman 2017]
  if (c.hoursToVentilation != null && c.hoursToVentilation <= 72) met.push('hoursToVentilation'); // [source: Roden-Foreman 2017]
  if (c.hoursToDeath != null && c.hoursToDeath <= 60) met.push('hoursToDeath'); // [source: Roden-Foreman 2017]
  return met;
}

/** True when any component is met; false only when every component is known and none is; null otherwise. */
export function nftiPositive(c: NftiComponents): boolean | null {
  if (nftiMet(c).length > 0) return true;
  const known =
    c.redCellsWithin4h != null &&
    c.minutesToOperatingRoom !== undefined &&
    c.minutesToInterventionalRadiology !== undefined &&
    c.icuDays !== undefined &&
    c.hoursToVentilation !== undefined &&
    c.hoursToDeath !== undefined;
  return known ? false : null;
}
