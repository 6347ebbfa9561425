import { describe, expect, it } from 'vitest';
import { outcomeTemplateCsv, parseOutcomeCsv } from '../../../../server/services/outcomes/parse';
import { OUTCOME_COLUMN_NAMES } from '../../../../shared/schemas/quality';

// The outcome CSV read into rows: the file's own checks, the header's names, and each data row
// numbered as a spreadsheet numbers it (the header is row 1). ISS values per
// shared/triage/SOURCES.md §7 (Baker 1974).

const csv = (text: string) => Buffer.from(text, 'utf8');

describe('reading the file', () => {
  it('reads rows under a header in capitals with a byte-order mark, semicolons and a blank line', async () => {
    // Baker 1974 [source]: 9 (one region at AIS 3) and 17 (4² + 1²) are possible ISS values.
    const { rows, fileIssues } = await parseOutcomeCsv(csv('\ufeffCase Number;ISS\r\nP26-00001;9\r\n\r\np26-00002;17\r\n'));
    expect(fileIssues).toEqual([]);
    expect(rows.map((r) => [r.row, r.caseNumber, r.record?.iss, r.issues])).toEqual([[2, 'P26-00001', 9, []], [4, 'P26-00002', 17, []]]);
  });

  it('names a row with more cells than the header has columns', async () => {
    const { rows } = await parseOutcomeCsv(csv('case_number,iss\nP1,9,extra\n'));
    expect(rows[0]).toMatchObject({ row: 2, caseNumber: 'P1', record: null, issues: [{ row: 2, column: null, message: 'has 3 cells but the header has 2 columns' }] });
  });

  it('a bad ISS in a row is that row and column', async () => {
    const { rows } = await parseOutcomeCsv(csv('case_number,iss\nP1,9\nP2,15\n'));
    expect(rows[1].issues).toEqual([{ row: 3, column: 'iss', message: '15 cannot be a score: it is not a sum of three AIS squares (check for a typing slip)' }]);
  });

  it('a formula in the case number is kept as text, uppercased, for the case look-up to refuse', async () => {
    const { rows } = await parseOutcomeCsv(csv('case_number,iss\n"=HYPERLINK(""http://x"")",9\n'));
    expect(rows[0]).toMatchObject({ row: 2, caseNumber: '=HYPERLINK("HTTP://X")', issues: [] });
  });
});

describe('the file as a whole', () => {
  it('a missing case_number column', async () => {
    expect((await parseOutcomeCsv(csv('iss\n9\n'))).fileIssues).toEqual([{ row: 1, column: 'case_number', message: 'is missing from the header row; every file needs it' }]);
  });

  it('an unknown, a nameless and a repeated column', async () => {
    expect((await parseOutcomeCsv(csv('case_number,isss,,iss,iss\nP1,9,,9,9\n'))).fileIssues).toEqual([
      { row: 1, column: 'isss', message: `is not a column we know; the columns are: ${OUTCOME_COLUMN_NAMES.join(', ')}` },
      { row: 1, column: null, message: 'A column has no name in the header row' },
      { row: 1, column: 'iss', message: 'appears twice in the header row' },
    ]);
  });

  it('an empty file, a header alone, and a file that is not text', async () => {
    expect((await parseOutcomeCsv(csv(''))).fileIssues).toEqual([{ row: 1, column: null, message: 'The file is empty; it needs a header row and one row per case' }]);
    expect((await parseOutcomeCsv(csv('case_number,iss\n'))).fileIssues).toEqual([{ row: 2, column: null, message: 'The file has a header but no rows' }]);
    expect((await parseOutcomeCsv(Buffer.from([0x50, 0x4b, 0x03, 0x04, 0x00]))).fileIssues).toEqual([{ row: 1, column: null, message: 'The file is not text; export the registry data as CSV' }]);
  });

  it('the template reads back as a clean row', async () => {
    const { rows, fileIssues } = await parseOutcomeCsv(csv(outcomeTemplateCsv()));
    expect(fileIssues).toEqual([]);
    expect(rows).toHaveLength(1);
    expect(rows[0].issues).toEqual([]);
  });
});
