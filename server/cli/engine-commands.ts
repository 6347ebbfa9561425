import { createInterface } from 'node:readline';
import { ClinicalInput } from '../../shared/schemas/clinical';
import { describeIssues, formatIssue } from '../../shared/schemas/issues';
import { isCriteriaSetId } from '../../shared/triage/catalog';
import type { CriteriaSetId } from '../../shared/triage/criteria';
import { evaluate } from '../../shared/triage/evaluate';
import { BUILT_IN_POLICIES, EXAMPLE_POLICY, LEVEL_IDS, type LevelId, type Policy } from '../../shared/triage/policy';
import { cribariMatrix, type OutcomeStandard, type TriageOutcome } from '../../shared/quality/cribari';
import { IssInput, injuryScores } from '../../shared/quality/iss';

// The engine's batch commands. Exit codes: 0 all input answered, 1 some input refused (each
// refusal on stderr as "line N: field: message", good lines still answered), 2 bad arguments.

export interface CliIo {
  stdin: NodeJS.ReadableStream;
  stdout: NodeJS.WritableStream;
  stderr: NodeJS.WritableStream;
}

const USAGE_EVALUATE = 'usage: plumbline evaluate [--set field-2021|field-2011] [--policy ID] < inputs.jsonl\n';
const USAGE_CRIBARI = 'usage: plumbline cribari < outcomes.csv   (columns activation,iss[,nfti]; header optional)\n';
const USAGE_ISS = 'usage: plumbline iss < injuries.json   ({ "injuries": [{ "region", "ais" }] }, one per line or one document)\n';

/** Buffers output so that a long batch is a few large writes, and waits when the pipe is full. */
class Output {
  private buffer = '';
  constructor(private readonly stream: NodeJS.WritableStream) {}
  async line(text: string): Promise<void> {
    this.buffer += text + '\n';
    if (this.buffer.length >= 65_536) await this.flush();
  }
  async flush(): Promise<void> {
    if (this.buffer === '') return;
    const chunk = this.buffer;
    this.buffer = '';
    if (!this.stream.write(chunk)) await new Promise<void>((resolve) => this.stream.once('drain', () => resolve()));
  }
}

function parseFlags(args: string[], known: readonly string[]): { flags: Map<string, string>; error?: string } {
  const flags = new Map<string, string>();
  for (let i = 0; i < args.length; i++) {
    const arg = args[i];
    const eq = arg.indexOf('=');
    const name = eq > 0 ? arg.slice(0, eq) : arg;
    if (name === '--help' || name === '-h') {
      flags.set('--help', '');
      continue;
    }
    if (!known.includes(name)) return { flags, error: `unknown argument ${arg}` };
    const value = eq > 0 ? arg.slice(eq + 1) : args[++i];
    if (value === undefined || value === '') return { flags, error: `${name} needs a value` };
    flags.set(name, value);
  }
  return { flags };
}

async function* lines(stdin: NodeJS.ReadableStream): AsyncGenerator<[number, string]> {
  let n = 0;
  for await (const raw of createInterface({ input: stdin, crlfDelay: Infinity })) {
    n++;
    const line = n === 1 ? raw.replace(/^\uFEFF/, '') : raw;
    if (line.trim() !== '') yield [n, line];
  }
}

function parseJson(text: string): { value: unknown } | { error: string } {
  try {
    return { value: JSON.parse(text) };
  } catch (error) {
    return { error: `not valid JSON (${(error as Error).message})` };
  }
}

export async function evaluateCommand(args: string[], io: CliIo): Promise<number> {
  const { flags, error } = parseFlags(args, ['--set', '--policy']);
  if (flags.has('--help')) {
    io.stdout.write(USAGE_EVALUATE);
    return 0;
  }
  if (error) {
    io.stderr.write(`${error}\n${USAGE_EVALUATE}`);
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

  const out = new Output(io.stdout);
  let refused = 0;
  for await (const [n, text] of lines(io.stdin)) {
    const json = parseJson(text);
    if ('error' in json) {
      refused++;
      io.stderr.write(`line ${n}: ${json.error}\n`);
      continue;
    }
    const parsed = ClinicalInput.safeParse(json.value);
    if (!parsed.success) {
      refused++;
      for (const issue of describeIssues(parsed.error)) io.stderr.write(`line ${n}: ${formatIssue(issue)}\n`);
      continue;
    }
    await out.line(JSON.stringify(evaluate(parsed.data, { set, policy })));
  }
  await out.flush();
  return refused ? 1 : 0;
}

const YES = new Set(['yes', 'true', '1', 'y']);
const NO = new Set(['no', 'false', '0', 'n']);

function cells(line: string): string[] {
  return line.split(',').map((cell) => cell.trim().replace(/^"(.*)"$/, '$1').trim());
}

export async function cribariCommand(args: string[], io: CliIo): Promise<number> {
  if (args.includes('--help') || args.includes('-h')) {
    io.stdout.write(USAGE_CRIBARI);
    return 0;
  }
  if (args.length) {
    io.stderr.write(`unknown argument ${args[0]}\n${USAGE_CRIBARI}`);
    return 2;
  }
  const rows: TriageOutcome[] = [];
  let columns: { activation: number; iss: number; nfti: number } | null = null;
  let refused = 0;
  const refuse = (n: number, message: string) => {
    refused++;
    io.stderr.write(`line ${n}: ${message}\n`);
  };

  for await (const [n, text] of lines(io.stdin)) {
    const row = cells(text);
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
    const iss = issText === '' ? null : Number(issText);
    if (iss !== null && !(Number.isInteger(iss) && iss >= 0 && iss <= 75)) {
      refuse(n, 'iss: must be a whole number from 0 to 75, or empty when not known');
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
