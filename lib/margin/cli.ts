/**
 * Command line of the engine (run through bin/borderline):
 *
 *   borderline fit FILE [--kernel linear|rbf|poly] [--C x] [--gamma x] [--degree n] [--coef0 x]
 *                       [--solver smo|dcd] [--hard] [--tol x] [--scale standard|l2|none] [--seed n] [--json OUT]
 *   borderline audit FILE [--folds k] [--seed n] [--json OUT]     (also accepts the fit options)
 *
 * Defaults: linear kernel, C = 1, gamma = 1/(number of features) and degree 3, coef0 0 (the LIBSVM
 * defaults), solver smo, tol = the solver's default (smo 1e-3, dcd 0.1), scale standard, seed 1,
 * folds 5. `--json -` writes the JSON to stdout and the summary to stderr.
 *
 * Exit codes: 0 success; 2 bad input (usage, options, unreadable or invalid file, data the engine
 * cannot fit) with one line on stderr naming the file, row and column where they apply; 1 internal
 * error (one line; set BORDERLINE_DEBUG=1 for the stack).
 */
import { writeFileSync } from 'node:fs';
import { pathToFileURL } from 'node:url';
import { parseArgs } from 'node:util';
import { auditSamples, type AuditResult } from './audit';
import { auditJson, fitJson } from './contract';
import { InputFileError, readLabelledFile } from './io';
import { fitMargins, type FitResult, type FitSettings, type SolverKind } from './model';
import type { ScaleKind } from './preprocess';
import { EngineInputError, type KernelSpec } from './types';

const USAGE = `usage:
  borderline fit FILE [--kernel linear|rbf|poly] [--C x] [--gamma x] [--degree n] [--coef0 x]
                      [--solver smo|dcd] [--hard] [--tol x] [--scale standard|l2|none] [--seed n] [--json OUT]
  borderline audit FILE [--folds k] [--seed n] [--json OUT]   (accepts the fit options too)
FILE is CSV with header id,label,<features> or JSON Lines {"id","label","features":[...]}.`;

class UsageError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'UsageError';
  }
}

const OPTIONS = {
  kernel: { type: 'string' },
  C: { type: 'string' },
  gamma: { type: 'string' },
  degree: { type: 'string' },
  coef0: { type: 'string' },
  solver: { type: 'string' },
  hard: { type: 'boolean' },
  tol: { type: 'string' },
  scale: { type: 'string' },
  seed: { type: 'string' },
  json: { type: 'string' },
  folds: { type: 'string' },
  help: { type: 'boolean', short: 'h' },
} as const;

type Values = { [K in keyof typeof OPTIONS]?: (typeof OPTIONS)[K]['type'] extends 'boolean' ? boolean : string };

const NUMBER_RE = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;

function numberOption(name: string, text: string | undefined, check: (v: number) => boolean, what: string): number | undefined {
  if (text === undefined) return undefined;
  const v = NUMBER_RE.test(text.trim()) ? Number(text) : NaN;
  if (!Number.isFinite(v) || !check(v)) throw new UsageError(`--${name} expects ${what}, got "${text}"`);
  return v;
}

function oneOf<T extends string>(name: string, text: string | undefined, allowed: readonly T[]): T | undefined {
  if (text === undefined) return undefined;
  if (!(allowed as readonly string[]).includes(text)) throw new UsageError(`--${name} expects one of ${allowed.join(', ')}, got "${text}"`);
  return text as T;
}

function parse(argv: string[]): { command: 'fit' | 'audit' | 'help'; file: string; values: Values } {
  let parsed: { values: Values; positionals: string[] };
  try {
    parsed = parseArgs({ args: argv, options: OPTIONS, allowPositionals: true, strict: true }) as { values: Values; positionals: string[] };
  } catch (e) {
    const err = e as Error & { code?: string };
    const m = /'(-[^']*)'/.exec(err.message);
    if (err.code === 'ERR_PARSE_ARGS_UNKNOWN_OPTION') throw new UsageError(`unknown option ${m ? m[1] : ''}`.trim());
    if (err.code === 'ERR_PARSE_ARGS_INVALID_OPTION_VALUE') {
      const opt = /--?[A-Za-z0-9]+/.exec(err.message);
      throw new UsageError(`option ${opt ? opt[0] : ''} ${/argument missing/.test(err.message) ? 'needs a value' : 'has an invalid value'}`.replace(/\s+/g, ' '));
    }
    throw new UsageError(err.message.split('\n')[0]);
  }
  const { values, positionals } = parsed;
  if (values.help || positionals[0] === 'help') return { command: 'help', file: '', values };
  const [command, file, ...rest] = positionals;
  if (command === undefined) throw new UsageError('missing command (fit or audit)');
  if (command !== 'fit' && command !== 'audit') throw new UsageError(`unknown command "${command}" (expected fit or audit)`);
  if (file === undefined) throw new UsageError(`${command}: missing FILE`);
  if (rest.length > 0) throw new UsageError(`${command}: unexpected argument "${rest[0]}"`);
  if (command === 'fit' && values.folds !== undefined) throw new UsageError('fit: unknown option --folds (it belongs to audit)');
  return { command, file, values };
}

function settingsFrom(values: Values, features: number): FitSettings {
  const kernelType = oneOf('kernel', values.kernel, ['linear', 'rbf', 'poly'] as const) ?? 'linear';
  const solver = oneOf<SolverKind>('solver', values.solver, ['smo', 'dcd']) ?? 'smo';
  const scale = oneOf<ScaleKind>('scale', values.scale, ['standard', 'l2', 'none']) ?? 'standard';
  const hard = values.hard ?? false;
  const C = numberOption('C', values.C, (v) => v > 0, 'a positive number');
  const gamma = numberOption('gamma', values.gamma, (v) => v > 0, 'a positive number');
  const degree = numberOption('degree', values.degree, (v) => Number.isInteger(v) && v >= 1, 'a positive integer');
  const coef0 = numberOption('coef0', values.coef0, () => true, 'a number');
  const tol = numberOption('tol', values.tol, (v) => v > 0, 'a positive number');
  const seed = numberOption('seed', values.seed, (v) => Number.isSafeInteger(v), 'an integer') ?? 1;
  const folds = numberOption('folds', values.folds, (v) => Number.isInteger(v) && v >= 2, 'an integer ≥ 2');
  if (kernelType === 'linear' && gamma !== undefined) throw new UsageError('--gamma applies to the rbf and poly kernels only');
  if (kernelType !== 'poly' && (degree !== undefined || coef0 !== undefined)) throw new UsageError('--degree and --coef0 apply to the poly kernel only');
  if (hard && C !== undefined) throw new UsageError('--C does not apply with --hard (the hard margin has no C)');
  if (hard && solver === 'dcd') throw new UsageError('--hard runs its own exact test and SMO; it does not take --solver dcd');
  if (solver === 'dcd' && kernelType !== 'linear') throw new UsageError(`--solver dcd solves the linear kernel only; use --solver smo for --kernel ${kernelType}`);
  const g = gamma ?? 1 / features;
  const kernel: KernelSpec =
    kernelType === 'linear'
      ? { type: 'linear' }
      : kernelType === 'rbf'
        ? { type: 'rbf', gamma: g }
        : { type: 'poly', gamma: g, degree: degree ?? 3, coef0: coef0 ?? 0 };
  return {
    kernel,
    C: hard ? Infinity : (C ?? 1),
    solver,
    hard,
    scale,
    seed,
    ...(tol !== undefined ? { tol } : {}),
    ...(folds !== undefined ? { folds } : {}),
  };
}

const g4 = (v: number): string => (Number.isFinite(v) ? (Math.abs(v) >= 1e4 || (Math.abs(v) < 1e-3 && v !== 0) ? v.toExponential(2) : String(Number(v.toPrecision(4)))) : v !== v ? 'n/a' : String(v));

function kernelText(k: KernelSpec): string {
  if (k.type === 'linear') return 'linear kernel';
  if (k.type === 'rbf') return `rbf kernel (gamma ${g4(k.gamma)})`;
  return `poly kernel (gamma ${g4(k.gamma)}, degree ${k.degree}, coef0 ${g4(k.coef0)})`;
}

export function fitSummary(file: string, r: FitResult): string {
  const s = r.settings;
  const lines: string[] = [];
  const n = r.ids.length;
  const binary = r.boundaries.length === 1;
  lines.push(
    `${file}: ${n} samples, ${r.preprocessor.cols} features, ${r.classes.length} classes: ${r.classes.join(', ')}${binary ? ` (y = +1 for ${r.classes[1]})` : ' (one-vs-rest)'}`,
  );
  const zeroVar = r.preprocessor.zeroVarianceColumns.length;
  lines.push(
    `fit: ${kernelText(s.kernel)}, ${s.hard ? 'hard margin' : `C ${g4(s.C)}`}, solver ${s.solver} (${r.boundaries[0].formulation}), tol ${g4(s.tol)}, scale ${s.scale}${zeroVar ? ` (${zeroVar} constant column${zeroVar > 1 ? 's' : ''} set to 0)` : ''}`,
  );
  for (const b of r.boundaries) {
    const c = b.counts;
    const sol = b.solution;
    lines.push(`boundary ${b.name}:`);
    if (b.hardMargin && !b.hardMargin.separable) {
      lines.push(`  ${b.hardMargin.reason}`);
      lines.push(`  wrong side of the best hyperplane found: ${b.hardMargin.wrongSideCount}`);
      continue;
    }
    lines.push(`  margin width ${g4(b.marginWidth)}, b ${g4(sol.b)}, separable ${b.separable === null ? 'not decided (training errors)' : b.separable ? 'yes' : 'no'}`);
    lines.push(`  support vectors ${c.support} (${c.free} free, ${c.bound} at bound)`);
    lines.push(
      `  converged ${sol.converged ? 'yes' : 'NO'} after ${sol.iterations} iterations, duality gap ${g4(sol.dualityGap)}, max KKT violation ${g4(sol.maxKktViolation)}`,
    );
    const pv = b.pivots;
    lines.push(
      `  wrong side ${c.wrongSide}, inside margin ${c.insideMargin}, near boundary ${c.nearBoundary}, pivots ${c.pivot}${pv ? ` (${pv.computed.length} of ${pv.supportCount} support vectors checked)` : ''}`,
    );
  }
  if (r.multiclass) {
    const w = Math.max(...r.classes.map((c) => c.length), 9);
    lines.push(`confusion (rows: label, columns: predicted), accuracy ${g4(r.multiclass.accuracy)}:`);
    lines.push(`  ${''.padEnd(w)} ${r.classes.map((c) => c.padStart(w)).join(' ')}`);
    r.multiclass.confusion.forEach((row, t) => lines.push(`  ${r.classes[t].padEnd(w)} ${row.map((v) => String(v).padStart(w)).join(' ')}`));
  }
  return lines.join('\n');
}

export function auditSummary(file: string, a: AuditResult, top = 10): string {
  const lines = [fitSummary(file, a.fit)];
  lines.push(`out-of-fold: ${a.outOfFold.folds} stratified folds, seed ${a.outOfFold.seed}${a.outOfFold.converged ? '' : ' (some fold fits did NOT converge)'}`);
  lines.push(`most suspicious (of ${a.ranking.length}):`);
  const k = Math.min(top, a.ranking.length);
  const idw = Math.max(2, ...a.ranking.slice(0, k).map((r) => r.id.length));
  const lw = Math.max(5, ...a.ranking.slice(0, k).map((r) => r.label.length));
  lines.push(`  ${'#'.padStart(3)}  ${'id'.padEnd(idw)}  ${'label'.padEnd(lw)}  suspicion  reason`);
  a.ranking.slice(0, k).forEach((r, i) => {
    lines.push(`  ${String(i + 1).padStart(3)}  ${r.id.padEnd(idw)}  ${r.label.padEnd(lw)}  ${r.suspicion.toFixed(3).padStart(9)}  ${r.reasons[0] ?? ''}`);
  });
  return lines.join('\n');
}

function writeJson(out: string, value: unknown): void {
  const text = JSON.stringify(value) + '\n';
  if (out === '-') {
    process.stdout.write(text);
    return;
  }
  try {
    writeFileSync(out, text);
  } catch (e) {
    const code = e && typeof e === 'object' && 'code' in e ? String((e as { code: unknown }).code) : 'error';
    throw new InputFileError(out, null, null, `cannot write file (${code})`);
  }
}

const defaultIo = {
  out: (s: string) => void process.stdout.write(s + '\n'),
  err: (s: string) => void process.stderr.write(s + '\n'),
};

/** Runs the command line; returns the exit code (never throws). */
export async function main(argv: string[], io: { out: (s: string) => void; err: (s: string) => void } = defaultIo): Promise<number> {
  let file = '';
  try {
    const parsed = parse(argv);
    const { command, values } = parsed;
    file = parsed.file;
    if (command === 'help') {
      io.out(USAGE);
      return 0;
    }
    const data = await readLabelledFile(file);
    const settings = settingsFrom(values, data.X.cols);
    const summaryOut = values.json === '-' ? io.err : io.out;
    if (command === 'fit') {
      const result = fitMargins(data, settings);
      summaryOut(fitSummary(file, result));
      if (values.json !== undefined) writeJson(values.json, fitJson(result));
    } else {
      const result = auditSamples(data, settings);
      summaryOut(auditSummary(file, result));
      if (values.json !== undefined) writeJson(values.json, auditJson(result));
    }
    return 0;
  } catch (e) {
    if (e instanceof UsageError) {
      io.err(`borderline: ${e.message} (see borderline --help)`);
      return 2;
    }
    if (e instanceof InputFileError) {
      io.err(e.message);
      return 2;
    }
    if (e instanceof EngineInputError) {
      io.err(`${file || 'borderline'}: ${e.message}`);
      return 2;
    }
    const err = e instanceof Error ? e : new Error(String(e));
    io.err(`borderline: internal error: ${err.message.split('\n')[0]}`);
    if (process.env.BORDERLINE_DEBUG) io.err(String(err.stack));
    return 1;
  }
}

// Run when executed directly (`npx tsx lib/margin/cli.ts fit data.csv`).
if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  void main(process.argv.slice(2)).then((code) => {
    process.exitCode = code;
  });
}
