import { stringify as csvLine } from 'csv-stringify/sync';
import { z } from 'zod';
import {
  CONSIDERATIONS, ClinicalInput, FINDINGS, unknownFieldMessage,
} from '../../shared/schemas/clinical';
import { describeIssues, formatIssue } from '../../shared/schemas/issues';
import { isCriteriaSetId } from '../../shared/triage/catalog';
import type { CriteriaSetId } from '../../shared/triage/criteria';
import { evaluate, type Evaluation } from '../../shared/triage/evaluate';
import { BUILT_IN_POLICIES, EXAMPLE_POLICY, LEVEL_IDS, type LevelId, type Policy } from '../../shared/triage/policy';
import { cribariMatrix, type OutcomeStandard, type TriageOutcome } from '../../shared/quality/cribari';
import { IssInput, injuryScores } from '../../shared/quality/iss';
import { LEAF_FIELDS, parseFlags, lines, readAll, parseJson, YES, NO, type Refusal, metresFromAlternatives, CSV_FIELDS, rowToInput, readCsv } from './cli-input';

// The engine's batch commands. Exit codes: 0 all input answered; 1 input refused (each refusal
// on stderr as "line N: field: message", good lines still answered), or no input at all; 2 bad
// arguments. They never print a stack trace: main.ts catches whatever is left.

export interface CliIo {
  stdin: NodeJS.ReadableStream;
  stdout: NodeJS.WritableStream;
  stderr: NodeJS.WritableStream;
}

const EXIT_CODES = `Exit codes:
  0  every input answered
  1  some or all input refused (each on stderr as "line N: field: message"), or no input at all
  2  bad arguments
`;

/** Fields a CSV header or a JSON line may name: the clinical input's, and the two other units of the fall height. */

function evaluateHelp(): string {
  return `usage: plumbline evaluate [--set field-2021|field-2011] [--policy ID] [--csv] [--out jsonl|csv] < inputs

Reads clinical inputs on stdin, one JSON object per line (JSON Lines), or with --csv a CSV file
whose header row names the fields. Writes one result per input: JSON Lines, or CSV with --out csv
(the default output is the input's format). Unknown fields are refused.

Fields (dotted paths; in CSV, the header names them and an empty cell is "not recorded"):
${LEAF_FIELDS.map((f) => `  ${f}`).join('\n')}
The fall height may be given in metres (fall.heightM), feet (fall.heightFt) or storeys of 10 ft
(fall.heightStoreys): exactly one of the three. In CSV, yes/no or true/false for the yes-or-no
fields, and findings and considerations as ids separated by spaces or semicolons.

Finding ids:
${FINDINGS.map((f) => `  ${f}`).join('\n')}
Consideration ids:
${CONSIDERATIONS.map((c) => `  ${c}`).join('\n')}

Criteria sets: field-2021 (default), field-2011. Policies: ${[...BUILT_IN_POLICIES.keys()].join(', ')}.
\`plumbline schema\` prints the input's JSON Schema.

${EXIT_CODES}`;
}

const USAGE_CRIBARI = `usage: plumbline cribari [--delimiter ,|;|tab] < outcomes.csv

Reads one case per row: activation (full, limited, consult, none), iss (a whole number 0–75, or
empty when not known) and, optionally, nfti (yes/no, true/false, 1/0, or empty). A header row
naming these columns is optional. The delimiter (comma, semicolon or tab) is detected from the
first row unless given. Numbers are decimal digits only. Prints the Cribari matrix and rates as JSON.

${EXIT_CODES}`;
const USAGE_ISS = 'usage: plumbline iss < injuries.json   ({ "injuries": [{ "region", "ais" }] }, one per line or one document)\n';

/** Buffers output so that a long batch is a few large writes, and waits when the pipe is full. */
class Output {
  private buffer = '';
  constructor(private readonly stream: NodeJS.WritableStream) {}
  async line(text: string): Promise<void> {
    this.buffer += text.endsWith('\n') ? text : text + '\n';
    if (this.buffer.length >= 65_536) await this.flush();
  }
  async flush(): Promise<void> {
    if (this.buffer === '') return;
    const chunk = this.buffer;
    this.buffer = '';
    if (!this.stream.write(chunk)) await new Promise<void>((resolve) => this.stream.once('drain', () => resolve()));
  }
}

const OUT_COLUMNS = ['line', 'set', 'fieldRisk', 'activation', 'activationName', 'criteria', 'because', 'missing', 'policy'] as const;

function csvRow(n: number, r: Evaluation): string {
  return csvLine([[
    n, r.set, r.fieldRisk, r.activation, r.activationName,
    r.criteria.map((c) => c.id).join(' '),
    r.criteria.map((c) => c.because).join(' | '),
    r.missing.map((m) => m.field).join(' '),
    `${r.policy.id} v${r.policy.version}`,
  ]]);
}

export async function evaluateCommand(args: string[], io: CliIo): Promise<number> {
  const { flags, error } = parseFlags(args, ['--set', '--policy', '--out'], ['--csv']);
  if (flags.has('--help')) {
    io.stdout.write(evaluateHelp());
    return 0;
  }
  const usage = 'usage: plumbline evaluate [--set field-2021|field-2011] [--policy ID] [--csv] [--out jsonl|csv]; --help for the fields\n';
  if (error) {
    io.stderr.write(`${error}\n${usage}`);
    return 2;
  }
  const setArg = flags.get('--set') ?? 'field-2021';
  if (!isCriteriaSetId(setArg)) {
    io.stderr.write(`unknown criteria set ${setArg}; known: field-2021, field-2011\n`);
    return 2;
  }
  const set: CriteriaSetId = setArg;
  const policyId = flags.get('--policy') ?? EXAMPLE_POLICY.id;
  const policy: Policy | undefined = BUILT_IN_POLICIES.get(policyId);
  if (!policy) {
    io.stderr.write(`unknown policy ${policyId}; built in: ${[...BUILT_IN_POLICIES.keys()].join(', ')}\n`);
    return 2;
  }
  const csvIn = flags.has('--csv');
  const outFormat = flags.get('--out') ?? (csvIn ? 'csv' : 'jsonl');
  if (outFormat !== 'csv' && outFormat !== 'jsonl') {
    io.stderr.write(`--out must be jsonl or csv, not ${outFormat}\n`);
    return 2;
  }

  const out = new Output(io.stdout);
  let refused = 0, inputs = 0;
  const refuse = (n: number, refusals: readonly Refusal[]) => {
    refused++;
    for (const r of refusals) io.stderr.write(`line ${n}: ${r.field ? formatIssue(r) : r.message}\n`);
  };
  if (outFormat === 'csv') await out.line(csvLine([[...OUT_COLUMNS]]));
  const answer = async (n: number, value: unknown) => {
    inputs++;
    const height = metresFromAlternatives(value);
    if (height) return refuse(n, [height]);
    const parsed = ClinicalInput.safeParse(value);
    if (!parsed.success) return refuse(n, describeIssues(parsed.error));
    const result = evaluate(parsed.data, { set, policy });
    await out.line(outFormat === 'csv' ? csvRow(n, result) : JSON.stringify(result));
  };

  if (csvIn) {
    const csv = readCsv(await readAll(io.stdin));
    if (csv.error !== undefined) {
      io.stderr.write(`${csv.error}\n`);
      return 1;
    }
    const [header, ...rows] = csv.rows;
    if (header) {
      const unknown = header.filter((h) => !CSV_FIELDS.has(h));
      if (unknown.length) {
        for (const h of unknown) io.stderr.write(`line 1: ${unknownFieldMessage(h)}\n`);
        return 1;
      }
      for (let k = 0; k < rows.length; k++) {
        const n = csv.lines[k + 1];
        const row = rowToInput(header, rows[k]);
        if ('refusals' in row) {
          inputs++;
          refuse(n, row.refusals);
        } else await answer(n, row.value);
      }
    }
  } else {
    for await (const [n, text] of lines(io.stdin)) {
      const json = parseJson(text);
      if ('error' in json) {
        inputs++;
        refuse(n, [{ field: '', message: json.error }]);
        continue;
      }
      await answer(n, json.value);
    }
  }
  await out.flush();
  if (inputs === 0) {
    io.stderr.write(`no input: give one clinical input per line on stdin\n${usage}`);
    return 1;
  }
  return refused ? 1 : 0;
}

/** The clinical input's JSON Schema, made from the zod schema the server checks with. */
export async function schemaCommand(args: string[], io: CliIo): Promise<number> {
  if (args.includes('--help') || args.includes('-h')) {
    io.stdout.write('usage: plumbline schema   (prints the clinical input\'s JSON Schema)\n');
    return 0;
  }
  if (args.length) {
    io.stderr.write(`unknown argument ${args[0]}\nusage: plumbline schema\n`);
    return 2;
  }
  const schema = z.toJSONSchema(ClinicalInput, { io: 'input', unrepresentable: 'any' });
  io.stdout.write(JSON.stringify({ title: 'Plumbline clinical input', ...schema }, null, 2) + '\n');
  return 0;
}

export async function cribariCommand(args: string[], io: CliIo): Promise<number> {
  const { flags, error } = parseFlags(args, ['--delimiter']);
  if (flags.has('--help')) {
    io.stdout.write(USAGE_CRIBARI);
    return 0;
  }
  if (error) {
    io.stderr.write(`${error}\n${USAGE_CRIBARI}`);
    return 2;
  }
  const delimiterArg = flags.get('--delimiter');
  const delimiter = delimiterArg === undefined ? undefined : delimiterArg === 'tab' || delimiterArg === '\\t' ? '\t' : delimiterArg;
  if (delimiter !== undefined && ![',', ';', '\t', '|'].includes(delimiter)) {
    io.stderr.write(`--delimiter must be one of , ; | tab, not ${delimiterArg}\n`);
    return 2;
  }
  const csv = readCsv(await readAll(io.stdin), delimiter);
  if (csv.error !== undefined) {
    io.stderr.write(`${csv.error}\n`);
    return 1;
  }
  const rows: TriageOutcome[] = [];
  let columns: { activation: number; iss: number; nfti: number } | null = null;
  let refused = 0;
  const refuse = (n: number, message: string) => {
    refused++;
    io.stderr.write(`line ${n}: ${message}\n`);
  };

  for (let k = 0; k < csv.rows.length; k++) {
    const n = csv.lines[k];
    const row = csv.rows[k];
    if (columns === null) {
      const names = row.map((cell) => cell.toLowerCase());
      if (names.includes('activation')) {
        columns = { activation: names.indexOf('activation'), iss: names.indexOf('iss'), nfti: names.indexOf('nfti') };
        if (columns.iss < 0) {
          io.stderr.write(`line ${n}: the header has no iss column\n`);
          return 1;
        }
        continue;
      }
      columns = { activation: 0, iss: 1, nfti: row.length >= 3 ? 2 : -1 };
    }
    const activation = row[columns.activation]?.toLowerCase() ?? '';
    if (!(LEVEL_IDS as readonly string[]).includes(activation)) {
      refuse(n, `activation: must be one of: ${LEVEL_IDS.join(', ')}`);
      continue;
    }
    const issText = row[columns.iss] ?? '';
    const iss = issText === '' ? null : /^\d{1,2}$/.test(issText) ? Number(issText) : NaN;
    if (iss !== null && !(iss >= 0 && iss <= 75)) {
      refuse(n, `iss: must be a whole decimal number from 0 to 75, or empty when not known, not "${issText.slice(0, 40)}"`);
      continue;
    }
    let nfti: boolean | null = null;
    if (columns.nfti >= 0) {
      const nftiText = (row[columns.nfti] ?? '').toLowerCase();
      if (YES.has(nftiText)) nfti = true;
      else if (NO.has(nftiText)) nfti = false;
      else if (nftiText !== '') {
        refuse(n, 'nfti: must be yes, no, true, false, 1 or 0, or empty when not known');
        continue;
      }
    }
    rows.push({ fullActivation: (activation as LevelId) === 'full', iss, nfti });
  }

  if (rows.length === 0) {
    io.stderr.write(refused ? `every row was refused (${refused}); no matrix\n` : `no input: give one case per row on stdin\n${USAGE_CRIBARI}`);
    return 1;
  }
  const standard: OutcomeStandard = columns !== null && columns.nfti >= 0 ? 'iss-or-nfti' : 'iss';
  io.stdout.write(JSON.stringify({ rows: rows.length, ...cribariMatrix(rows, standard) }) + '\n');
  return refused ? 1 : 0;
}

export async function issCommand(args: string[], io: CliIo): Promise<number> {
  if (args.includes('--help') || args.includes('-h')) {
    io.stdout.write(USAGE_ISS);
    return 0;
  }
  if (args.length) {
    io.stderr.write(`unknown argument ${args[0]}\n${USAGE_ISS}`);
    return 2;
  }
  const entries: [number, string][] = [];
  for await (const entry of lines(io.stdin)) entries.push(entry);
  // One document over several lines, or one document per line.
  const whole = entries.length > 1 ? parseJson(entries.map(([, text]) => text).join('\n')) : null;
  const documents: [number, { value: unknown } | { error: string }][] =
    whole && 'value' in whole ? [[entries[0][0], whole]] : entries.map(([n, text]) => [n, parseJson(text)]);

  const out = new Output(io.stdout);
  let refused = 0;
  for (const [n, json] of documents) {
    if ('error' in json) {
      refused++;
      io.stderr.write(`line ${n}: ${json.error}\n`);
      continue;
    }
    const parsed = IssInput.safeParse(json.value);
    if (!parsed.success) {
      refused++;
      for (const issue of describeIssues(parsed.error)) io.stderr.write(`line ${n}: ${formatIssue(issue)}\n`);
      continue;
    }
    await out.line(JSON.stringify(injuryScores(parsed.data.injuries)));
  }
  await out.flush();
  if (entries.length === 0) {
    io.stderr.write(`no input\n${USAGE_ISS}`);
    return 1;
  }
  return refused ? 1 : 0;
}
