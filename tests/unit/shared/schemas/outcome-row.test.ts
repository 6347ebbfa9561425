import { describe, expect, it } from 'vitest';
import { OutcomeCsvRow, checkOutcomeRow } from '../../../../shared/schemas/outcome-row';

// One registry CSV row checked by its schema: what a clean row becomes, and each problem named
// by row and column. Scores: ISS and NISS per shared/triage/SOURCES.md §7 (Baker 1974, Osler
// 1997); NFTI per §7 (Roden-Foreman 2017).

describe('a clean row', () => {
  it('AIS chest 3 and 2, extremities 3 → ISS 18, NISS 22; ICU 4 days meets NFTI', () => {
    // Baker 1974 [source]: worst per region, chest 3, extremities 3 → 9 + 9 = 18.
    // Osler 1997 [source]: three worst anywhere, 3, 3, 2 → 9 + 9 + 4 = 22.
    // Roden-Foreman 2017 [source]: an ICU stay of 3 days or more is an intervention.
    const r = checkOutcomeRow({ case_number: ' p26-00012 ', ais_chest: '3 2', ais_extremities: '3', red_cells_4h: 'no', icu_days: '4', minutes_to_or: 'none', disposition: 'ICU' }, 2);
    expect(r.issues).toEqual([]);
    expect(r.record).toEqual({
      caseNumber: 'P26-00012', iss: 18, niss: 22,
      ais: [{ region: 'chest', ais: 3 }, { region: 'chest', ais: 2 }, { region: 'extremities', ais: 3 }],
      redCellsWithin4h: false, minutesToOperatingRoom: null, minutesToInterventionalRadiology: undefined, icuDays: 4,
      hoursToVentilation: undefined, hoursToDeath: undefined, nftiGiven: null, nftiPositive: true, disposition: 'icu',
    });
  });

  it('an ISS alone, with a yes/no NFTI given by the registry', () => {
    // Baker 1974 [source]: 25 = 5², one region at AIS 5, is a possible ISS.
    expect(OutcomeCsvRow.parse({ case_number: 'P26-00013', iss: '25', nfti: 'yes' })).toMatchObject({ iss: 25, niss: null, ais: null, nftiGiven: true, nftiPositive: true });
  });
});

describe('problems, named by row and column', () => {
  it('a bad ISS: 7 is no sum of three AIS squares, 76 is above the scale, "abc" is no number', () => {
    // Baker 1974 [source]: ISS is 0–75 and a sum of at most three squares of 1–5; 7 cannot be one.
    expect(checkOutcomeRow({ case_number: 'P1', iss: '7' }, 4).issues).toEqual([{ row: 4, column: 'iss', message: '7 cannot be a score: it is not a sum of three AIS squares (check for a typing slip)' }]);
    expect(checkOutcomeRow({ case_number: 'P1', iss: '76' }, 4).issues).toEqual([{ row: 4, column: 'iss', message: '76 is above 75, the highest score there is' }]);
    expect(checkOutcomeRow({ case_number: 'P1', niss: 'abc', iss: '9' }, 4).issues).toEqual([{ row: 4, column: 'niss', message: '"abc" must be a whole number from 0 to 75' }]);
  });

  it('an ISS that the AIS columns contradict, reported beside a bad cell of the same row', () => {
    // Baker 1974 [source]: head-neck 3 and chest 3 → 9 + 9 = 18, not the 16 written.
    expect(checkOutcomeRow({ case_number: 'P1', iss: '16', ais_head_neck: '3', ais_chest: '3', red_cells_4h: 'maybe' }, 5).issues).toEqual([
      { row: 5, column: 'red_cells_4h', message: '"maybe" must be yes or no (or empty when not recorded)' },
      { row: 5, column: 'iss', message: '16 does not match the AIS columns, which give ISS 18' },
    ]);
  });

  it('a NISS below the ISS', () => {
    // Osler 1997 [source]: NISS takes the three worst injuries anywhere, so it is never below ISS.
    expect(checkOutcomeRow({ case_number: 'P1', iss: '17', niss: '9' }, 3).issues).toEqual([{ row: 3, column: 'niss', message: '9 is below the ISS 17; NISS is never lower than ISS' }]);
  });

  it('an NFTI answer its own fields contradict', () => {
    // Roden-Foreman 2017 [source]: death within 60 h of arrival is an intervention.
    expect(checkOutcomeRow({ case_number: 'P1', hours_to_death: '2', nfti: 'no' }, 6).issues).toEqual([{ row: 6, column: 'nfti', message: 'says no, but the NFTI fields of this row meet the definition' }]);
  });

  it('AIS 9, an unknown disposition and a word for a time, each in its column', () => {
    expect(checkOutcomeRow({ case_number: 'P1', iss: '9', ais_extremities: '9', minutes_to_or: 'soon', disposition: 'hospice' }, 10).issues).toEqual([
      { row: 10, column: 'ais_extremities', message: 'AIS 9 (severity not known) cannot be scored; the registry must resolve it first' },
      { row: 10, column: 'minutes_to_or', message: '"soon" must be a number, "none" when it did not happen, or empty when not recorded' },
      { row: 10, column: 'disposition', message: '"hospice" must be one of: home, ward, icu, operating-room, interventional-radiology, transferred, died, other' },
    ]);
  });

  it('formula cells are text that fails its column, never a value', () => {
    // A spreadsheet would run "=…", "+…", "-…" or "@…"; the import reads them as the text they are.
    expect(checkOutcomeRow({ case_number: 'P1', iss: '=9+0', red_cells_4h: '=TRUE()', icu_days: '+4', disposition: '@SUM(1)' }, 7).issues).toEqual([
      { row: 7, column: 'iss', message: '"=9+0" must be a whole number from 0 to 75' },
      { row: 7, column: 'red_cells_4h', message: '"=TRUE()" must be yes or no (or empty when not recorded)' },
      { row: 7, column: 'icu_days', message: '"+4" must be a number, "none" when it did not happen, or empty when not recorded' },
      { row: 7, column: 'disposition', message: '"@SUM(1)" must be one of: home, ward, icu, operating-room, interventional-radiology, transferred, died, other' },
    ]);
  });

  it('an empty case number, and a row with nothing to import', () => {
    expect(checkOutcomeRow({ case_number: '', iss: '9' }, 2).issues).toEqual([{ row: 2, column: 'case_number', message: 'is empty; every row needs the case number Plumbline gave the pre-alert' }]);
    expect(checkOutcomeRow({ case_number: 'P1', disposition: 'home' }, 3).issues).toEqual([{ row: 3, column: null, message: 'has no ISS, no AIS injuries and no NFTI; there is no outcome to import' }]);
  });
});
