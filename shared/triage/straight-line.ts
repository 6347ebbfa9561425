// A plan's steps (compile-criteria.ts) written out as the text of one JavaScript function, made
// once per plan where the engine allows code to be made at run time; see evaluate.ts.
import * as compiled from './compile-criteria';
import type { Step } from './compile-criteria';
import type { Facts } from './facts';

/**
 * One evaluation's pass over a plan's criteria, as the evaluator's step loop makes it: the field
 * risk, the first rule with a met member, and the met and unknown members.
 */
export type StraightLine = (
  lo: Float64Array, hi: Float64Array, years: number, flags: Uint8Array, f: Facts,
  met: Int32Array, unknown: Int32Array, unknownMissing: Int32Array, out: Int32Array,
) => void;

export interface LineMember {
  index: number;
  steps: readonly Step[];
  /** Raised to on a met member: its tier rank, 0 when it counts for no tier. */
  risk: number;
  /** Its first rule, `rules` when no rule names it. */
  firstRule: number;
}

/** The text of a number that reads back to the same double; only numbers ever enter the code. */
function literal(v: number): string {
  if (typeof v !== 'number' || Number.isNaN(v)) throw new Error(`not a number for a step: ${String(v)}`);
  if (v === Infinity) return 'Infinity';
  if (v === -Infinity) return '-Infinity';
  return Object.is(v, -0) ? '-0' : String(v);
}

function band(s: Step): string {
  const checks: string[] = [];
  if (s.from !== -Infinity) checks.push(`years < ${literal(s.from)}`);
  if (s.below !== Infinity) checks.push(`years >= ${literal(s.below)}`);
  return checks.join(' || ');
}

function leaf(s: Step): string {
  const t = literal(s.t), q = literal(s.a);
  switch (s.op) {
    case compiled.OP_FLAG: return `flags[${q}]`;
    case compiled.OP_BELOW: {
      const threshold = s.perYear ? `(${t} + ${literal(s.perYear)} * years)` : t;
      return `hi[${q}] < ${threshold} ? 1 : lo[${q}] >= ${threshold} ? 0 : 2`;
    }
    case compiled.OP_ABOVE: return `lo[${q}] > ${t} ? 1 : hi[${q}] <= ${t} ? 0 : 2`;
    case compiled.OP_AT_MOST: return `hi[${q}] <= ${t} ? 1 : lo[${q}] > ${t} ? 0 : 2`;
    case compiled.OP_EXCEEDS: {
      const y = literal(s.b);
      return `lo[${q}] > hi[${y}] ? 1 : hi[${q}] <= lo[${y}] ? 0 : 2`;
    }
    case compiled.OP_OUTSIDE: {
      const t2 = literal(s.t2);
      return `hi[${q}] < ${t} || lo[${q}] > ${t2} ? 1 : lo[${q}] >= ${t} && hi[${q}] <= ${t2} ? 0 : 2`;
    }
    case compiled.OP_ANY_FLAG: {
      const x = `flags[${q}]`, y = `flags[${literal(s.b)}]`, z = `flags[${literal(s.c)}]`;
      return `${x} === 1 || ${y} === 1 || ${z} === 1 ? 1 : ${x} === 2 || ${y} === 2 || ${z} === 2 ? 2 : 0`;
    }
    case compiled.OP_AGE: return '1';
    case compiled.OP_ROOM_AIR_SPO2_BELOW:
      return `f.roomAir === 0 || f.spo2 >= ${t} ? 0 : f.spo2 !== f.spo2 || f.roomAir !== 1 ? 2 : 1`;
    case compiled.OP_PREGNANCY_ABOVE:
      return `f.pregnancyWeeks === f.pregnancyWeeks ? (f.pregnancyWeeks > ${t} ? 1 : 0) : f.sex === 'male' || years < 10 || years >= 60 ? 0 : 2`;
    case compiled.OP_FINDING: return `(f.findings & ${q}) !== 0 ? 1 : 0`;
    case compiled.OP_CONSIDERATION: return `(f.considerations & ${q}) !== 0 ? 1 : 0`;
    default: throw new Error(`no straight-line form for step ${s.op}`);
  }
}

interface Value {
  name: string;
  /** The missing inputs when this value is unknown: a leaf's own, or those of its unknown parts. */
  missing: string;
}

/**
 * One member's steps as a block of constants and comparisons. `steps` collects the steps whose
 * missing inputs the code asks stepMissing() for at run time, by their place in that list.
 */
function memberCode(m: LineMember, rules: number, steps: Step[]): string {
  const lines: string[] = [];
  const stack: Value[] = [];
  m.steps.forEach((s, k) => {
    const name = `v${k}`;
    if (s.op === compiled.OP_ALL || s.op === compiled.OP_ANY) {
      const values = stack.splice(stack.length - s.a, s.a);
      const parts = values.map((v) => v.name);
      const is = (state: number) => parts.map((p) => `${p} === ${state}`).join(' || ');
      lines.push(s.op === compiled.OP_ALL
        ? `const ${name} = ${is(0)} ? 0 : ${is(2)} ? 2 : 1;`
        : `const ${name} = ${is(1)} ? 1 : ${is(2)} ? 2 : 0;`);
      stack.push({ name, missing: values.map((v) => `(${v.name} === 2 ? ${v.missing} : 0)`).join(' | ') });
    } else {
      const outside = band(s);
      lines.push(`const ${name} = ${outside ? `${outside} ? 0 : ` : ''}(${leaf(s)});`);
      const fixed = compiled.fixedStepMissing(s);
      stack.push({ name, missing: fixed !== null ? literal(fixed) : `stepMissing(steps[${steps.push(s) - 1}], f)` });
    }
  });
  const onMet: string[] = [];
  if (m.risk > 0) onMet.push(`if (risk < ${literal(m.risk)}) risk = ${literal(m.risk)};`);
  if (m.firstRule < rules) onMet.push(`if (matched > ${literal(m.firstRule)}) matched = ${literal(m.firstRule)};`);
  onMet.push(`met[m++] = ${literal(m.index)};`);
  const { name, missing } = stack[0];
  return `{\n${lines.join('\n')}\nif (${name} === 1) { ${onMet.join(' ')} } `
    + `else if (${name} === 2) { unknownMissing[u] = ${missing}; unknown[u++] = ${literal(m.index)}; }\n}`;
}

/**
 * Code is made at run time under Node.js only: the server, the command line and the tests. A
 * browser page runs the evaluator's step loop, which gives the same results: its strict
 * content-security policy forbids making code, and would report every attempt.
 */
export const CAN_MAKE_CODE = typeof (globalThis as { process?: { versions?: { node?: unknown } } }).process?.versions?.node === 'string';

/**
 * The plan's steps written out as one function, every threshold a constant and no dispatch per
 * step; null where code cannot be made. Only numbers from the steps, through literal(), and the
 * fixed text here enter the code: no text from a criterion or a policy does.
 */
export function straightLine(members: readonly LineMember[], rules: number): StraightLine | null {
  if (!CAN_MAKE_CODE) return null;
  const steps: Step[] = [];
  const body = [`let risk = 0, matched = ${literal(rules)}, m = 0, u = 0;`,
    ...members.map((m) => memberCode(m, rules, steps)), 'out[0] = risk; out[1] = matched; out[2] = m; out[3] = u;'].join('\n');
  const source = `"use strict";\nreturn function straightLine(lo, hi, years, flags, f, met, unknown, unknownMissing, out) {\n${body}\n};`;
  try {
    return new Function('steps', 'stepMissing', source)(steps, compiled.stepMissing) as StraightLine;
  } catch (err) {
    // Node.js started with --disallow-code-generation-from-strings refuses with an EvalError; any
    // other error is a fault in the code made here, which must not hide behind the step loop.
    if (err instanceof EvalError) return null;
    throw err;
  }
}
