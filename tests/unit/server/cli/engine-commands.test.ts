import { PassThrough, Readable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { cribariCommand, evaluateCommand, issCommand, type CliIo } from '../../../../server/cli/engine-commands';

async function run(command: (args: string[], io: CliIo) => Promise<number>, args: string[], input: string) {
  const stdout = new PassThrough();
  const stderr = new PassThrough();
  let out = '';
  let err = '';
  stdout.on('data', (chunk) => (out += chunk));
  stderr.on('data', (chunk) => (err += chunk));
  const code = await command(args, { stdin: Readable.from([input]), stdout, stderr });
  return { code, out, err, lines: out.split('\n').filter(Boolean).map((line) => JSON.parse(line)) };
}

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
