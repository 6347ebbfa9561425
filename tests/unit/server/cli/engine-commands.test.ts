import { PassThrough, Readable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { cribariCommand, evaluateCommand, issCommand, schemaCommand, type CliIo } from '../../../../server/cli/engine-commands';

async function run(command: (args: string[], io: CliIo) => Promise<number>, args: string[], input: string) {
  const stdout = new PassThrough();
  const stderr = new PassThrough();
  let out = '';
  let err = '';
  stdout.on('data', (chunk) => (out += chunk));
  stderr.on('data', (chunk) => (err += chunk));
  const code = await command(args, { stdin: Readable.from([input]), stdout, stderr });
  const jsonLines = () => {
    try {
      return out.split('\n').filter(Boolean).map((line) => JSON.parse(line));
    } catch {
      return [];
    }
  };
  return { code, out, err, lines: jsonLines() };
}

const ADULT = { ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 84 } };

describe('plumbline evaluate', () => {
  it('answers each JSON line, skips blank lines, refuses a bad one by line and field', async () => {
    const input = [
      JSON.stringify({ ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 84 } }),
      '',
      JSON.stringify({ ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 400 } }),
      '{ not json',
      JSON.stringify({ ageYears: 72, anticoagulant: true, fall: { heightM: 0, headImpact: true } }),
    ].join('\n');
    const { code, lines, err } = await run(evaluateCommand, [], input);
    expect(code).toBe(1);
    expect(lines.map((r) => r.activation)).toEqual(['full', 'consult']);
    expect(err).toMatch(/^line 3: vitals\.sbp: must be at most 300$/m);
    expect(err).toMatch(/^line 4: not valid JSON/m);
  });

  it('--set field-2011 chooses the set; an unknown policy or set is refused', async () => {
    const input = JSON.stringify({ ageYears: 60, fall: { heightM: 1 } });
    const ok = await run(evaluateCommand, ['--set', 'field-2011', '--policy=example-tiered'], input);
    expect(ok.code).toBe(0);
    expect(ok.lines[0].set).toBe('field-2011');
    expect(ok.lines[0].criteria.map((c: { id: string }) => c.id)).toEqual(['field-2011:age-above-55']);
    const badPolicy = await run(evaluateCommand, ['--policy', 'county-2025'], input);
    expect(badPolicy.code).toBe(2);
    expect(badPolicy.err).toMatch(/unknown policy county-2025/);
    expect((await run(evaluateCommand, ['--set', 'field-1999'], input)).code).toBe(2);
  });
});

describe('plumbline evaluate: the strict input and its formats', () => {
  it('refuses unknown fields by name with the nearest known one', async () => {
    // [ours]: an unknown key is never read as "not recorded" (SOURCES.md §10)
    const input = [
      JSON.stringify({ ageYears: 34, fall: { heightM: 4 }, SBP: 70 }),
      JSON.stringify({ ageYears: 34, fall: { heightM: 4 }, headimpact: true }),
      JSON.stringify({ ageYears: 34, fall: { heightM: 4 }, ['x'.repeat(5_000_000)]: 1 }),
    ].join('\n');
    const { code, lines, err } = await run(evaluateCommand, [], input);
    expect(code).toBe(1);
    expect(lines).toEqual([]);
    expect(err).toMatch(/^line 1: unknown field SBP; did you mean vitals\.sbp\?$/m);
    expect(err).toMatch(/^line 2: unknown field headimpact; did you mean fall\.headImpact\?$/m);
    expect(err).toMatch(/^line 3: unknown field x{60}…$/m);
    expect(err.length).toBeLessThan(400);
  });

  it('takes the fall height in feet or storeys, and refuses two units at once', async () => {
    // One storey = 10 ft; 1 ft = 0.3048 m [sourced: Sasser 2012; the international foot] (SOURCES.md §8)
    const input = [
      JSON.stringify({ ageYears: 40, fall: { heightFt: 25 } }),
      JSON.stringify({ ageYears: 40, fall: { heightStoreys: 2.5 } }),
      JSON.stringify({ ageYears: 40, fall: { heightM: 1, heightFt: 3 } }),
    ].join('\n');
    const { code, lines, err } = await run(evaluateCommand, [], input);
    expect(code).toBe(1);
    const ids = (r: { criteria: { id: string; set: string }[] }) => r.criteria.filter((c) => c.set === 'field-2021').map((c) => c.id);
    expect(lines.map(ids)).toEqual([['field-2021:fall-above-10-ft'], ['field-2021:fall-above-10-ft']]);
    expect(lines[0].impact.heightM).toBeCloseTo(7.62, 6);
    expect(err).toMatch(/^line 3: fall: give the fall height once, in one unit: fall\.heightM and fall\.heightFt both given$/m);
  });

  it('reads CSV named by its header and writes CSV', async () => {
    // SBP < 90 at 10–64 [sourced: Newgard 2022]; the example policy calls it full (SOURCES.md §6) [ours]
    const csv = 'ageYears,fall.heightFt,vitals.sbp,vitals.spo2RoomAir,findings\n34,12,84,yes,pelvic-fracture;skull-deformity\n70,0x10,120,,\n40,3,1e2,,\n';
    const { code, out, err } = await run(evaluateCommand, ['--csv'], csv);
    expect(code).toBe(1);
    const [header, first, ...rest] = out.trim().split('\n');
    expect(header).toBe('line,set,fieldRisk,activation,activationName,criteria,because,missing,policy');
    expect(first).toMatch(/^2,field-2021,high,full,/);
    expect(first).toContain('field-2021:skull-deformity field-2021:pelvic-fracture');
    expect(rest).toEqual([]);
    expect(err).toMatch(/^line 3: fall\.heightFt: must be a decimal number, not "0x10"$/m);
    expect(err).toMatch(/^line 4: vitals\.sbp: must be a decimal number, not "1e2"$/m);
    // CSV in, JSON Lines out.
    const jsonOut = await run(evaluateCommand, ['--csv', '--out', 'jsonl'], 'ageYears,fall.heightM\n34,1\n');
    expect(jsonOut.code).toBe(0);
    expect(jsonOut.lines[0].fieldRisk).toBe('none');
  });

  it('refuses an unknown CSV column before reading any row', async () => {
    const { code, out, err } = await run(evaluateCommand, ['--csv'], 'ageYears,fall.heightM,SBP\n34,1,70\n');
    expect(code).toBe(1);
    expect(out).toBe('');
    expect(err).toBe('line 1: unknown field SBP; did you mean vitals.sbp?\n');
  });

  it('empty input is an error with exit 1', async () => {
    for (const args of [[], ['--csv']]) {
      const { code, err } = await run(evaluateCommand, args, '\n\n');
      expect(code).toBe(1);
      expect(err).toMatch(/^no input/);
    }
  });

  it('--help lists the fields, the finding and consideration ids and the exit codes', async () => {
    const { code, out } = await run(evaluateCommand, ['--help'], '');
    expect(code).toBe(0);
    for (const text of ['vitals.spo2RoomAir', 'bodyHeightCm', 'fall.heightStoreys', 'two-proximal-long-bone-fractures', 'receiving-blood', 'Exit codes:', '2  bad arguments']) {
      expect(out).toContain(text);
    }
  });

  it('plumbline schema prints the strict input as JSON Schema', async () => {
    const { code, out } = await run(schemaCommand, [], '');
    expect(code).toBe(0);
    const schema = JSON.parse(out);
    expect(schema.additionalProperties).toBe(false);
    expect(schema.required).toEqual(['ageYears', 'fall']);
    expect(schema.properties.findings.maxItems).toBe(9);
    expect(schema.properties.fall.additionalProperties).toBe(false);
  });

  it('the installed command never prints a stack trace', () => {
    // Through the real entry point, as a batch user runs it.
    const bin = 'server/cli/bin.mjs';
    for (const [args, input] of [[['evaluate'], '{"ageYears": 1e999, "fall": {}}\n[1,2]\nnull\n'], [['cribari'], ''], [['cribari', '--delimiter', 'x'], 'full,1\n']] as const) {
      const result = spawnSync(process.execPath, [bin, ...args], { input, encoding: 'utf8' });
      expect(result.status).not.toBe(0);
      expect(result.stderr).not.toMatch(/\n\s+at /);
      expect(result.stderr.trim()).not.toBe('');
    }
  });
});

describe('plumbline cribari', () => {
  it('reads activation,iss with a header and prints the matrix', async () => {
    // a = 1 (full, 25), b = 1 (full, 9), c = 1 (limited, 16), d = 1 (none, 4): over = 1/2, under = 1/2 [source: ACS-COT method]
    const { code, lines } = await run(cribariCommand, [], 'activation,iss\nfull,25\nfull,9\nlimited,16\nnone,4\n');
    expect(code).toBe(0);
    expect(lines[0]).toMatchObject({ standard: 'iss', a: 1, b: 1, c: 1, d: 1, overTriage: 0.5, underTriage: 0.5 });
    expect(lines[0].overTriageCI).toHaveLength(2);
    expect(lines[0].sensitivityDefinition.underTriage).toBe(0.5);
  });

  it('with an nfti column, major trauma is ISS > 15 or NFTI-positive; bad rows are named', async () => {
    const { code, lines, err } = await run(cribariCommand, [], 'full,9,yes\nnone,4,no\nconsult,x,no\nmaybe,3,no\nnone,10,0\n');
    expect(code).toBe(1);
    expect(lines[0]).toMatchObject({ standard: 'iss-or-nfti', a: 1, b: 0, c: 0, d: 2, rows: 3 });
    expect(err).toMatch(/^line 3: iss: /m);
    expect(err).toMatch(/^line 4: activation: must be one of: full, limited, consult, none$/m);
  });

  it('numbers are decimal only', async () => {
    // ISS is a whole number 0–75 [sourced: Baker 1974]
    const { code, lines, err } = await run(cribariCommand, [], 'full,0x10\nfull,1e1\nnone, 4\nfull,20\n');
    expect(code).toBe(1);
    expect(lines[0]).toMatchObject({ rows: 2, a: 1, d: 1 });
    expect(err).toMatch(/^line 1: iss: must be a whole decimal number from 0 to 75, or empty when not known, not "0x10"$/m);
    expect(err).toMatch(/^line 2: iss: .*not "1e1"$/m);
  });

  it('detects a semicolon or tab delimiter, or takes --delimiter', async () => {
    // a = 1, d = 1 [sourced: ACS-COT method, SOURCES.md §7]
    for (const [args, input] of [[[], 'activation;iss\nfull;25\nnone;4\n'], [[], 'full\t25\nnone\t4\n'], [['--delimiter', ';'], 'full;25\nnone;4\n'], [['--delimiter=tab'], 'full\t25\nnone\t4\n']] as const) {
      const { code, lines } = await run(cribariCommand, [...args], input);
      expect(code).toBe(0);
      expect(lines[0]).toMatchObject({ rows: 2, a: 1, b: 0, c: 0, d: 1 });
    }
  });

  it('empty input, or every row refused, is an error, not a zero matrix', async () => {
    const empty = await run(cribariCommand, [], '');
    expect(empty.code).toBe(1);
    expect(empty.out).toBe('');
    expect(empty.err).toMatch(/^no input/);
    const allBad = await run(cribariCommand, [], 'activation,iss\nmaybe,4\nfull,0x1\n');
    expect(allBad.code).toBe(1);
    expect(allBad.out).toBe('');
    expect(allBad.err).toMatch(/every row was refused \(2\); no matrix/);
  });
});

describe('plumbline iss', () => {
  it('scores one document', async () => {
    // head-neck 5, chest 3, chest 2 → ISS 25 + 9 = 34 [source: Baker 1974]; NISS 25 + 9 + 4 = 38 [source: Osler 1997]
    const doc = { injuries: [{ region: 'head-neck', ais: 5 }, { region: 'chest', ais: 3 }, { region: 'chest', ais: 2 }] };
    const { code, lines } = await run(issCommand, [], JSON.stringify(doc, null, 2));
    expect(code).toBe(0);
    expect(lines).toEqual([{ iss: 34, niss: 38 }]);
  });

  it('scores one document per line and names a bad field', async () => {
    const input = [JSON.stringify({ injuries: [{ region: 'face', ais: 2 }] }), JSON.stringify({ injuries: [{ region: 'face', ais: 9 }] })].join('\n');
    const { code, lines, err } = await run(issCommand, [], input);
    expect(code).toBe(1);
    expect(lines).toEqual([{ iss: 4, niss: 4 }]);
    expect(err).toMatch(/^line 2: injuries\[0\]\.ais: must be at most 6/m);
  });
});
