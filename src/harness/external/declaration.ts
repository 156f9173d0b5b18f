/**
 * Estimator commands: a program in any language that hhat starts and talks to over the protocol of
 * ./protocol.ts. This file turns what the user wrote (a plan's `commands` entry, or `--estimator-command
 * 'ID=PROGRAM ARG...'`) into a declaration that names everything a run needs, and digests the files the command
 * names, for fingerprints. The declaration travels inside the plan to every worker thread.
 *
 *   parseCommandOption('my-kl=python3 my_kl.py --fast')  // { id: 'my-kl', command: ['python3', 'my_kl.py', '--fast'] }
 */
import { createHash } from 'node:crypto';
import { accessSync, constants, existsSync, readFileSync, statSync } from 'node:fs';
import { delimiter, isAbsolute, resolve } from 'node:path';
import type { Quantity, SettingSpec, SettingValue } from '../../core/contracts.js';
import { UsageError } from '../../core/errors.js';
import { ID_PATTERN, showValue } from '../../core/spec.js';

/** A setting as a command declares it: its default alone, or the fields of a SettingSpec. */
export type CommandSettingInput = number | string | (Partial<Omit<SettingSpec, 'name'>> & { default: SettingValue });

/** A `commands` entry of a plan file, or what `--estimator-command` gives. */
export interface CommandInput {
  id: string;
  /** The program and its arguments (no shell): an array, or one string split like a command line. */
  command: string[] | string;
  /** The command's working folder; default: the plan file's folder (or, from the command line, the working folder). */
  cwd?: string;
  /** Default: the plan's quantity. */
  quantity?: Quantity;
  /** Smallest and largest dimension it accepts; default any. */
  dims?: [number, number | null];
  settings?: Record<string, CommandSettingInput>;
  /** A tuning grid for robustness runs: setting name → the values to try. */
  tuning?: Record<string, (number | string)[]>;
  summary?: string;
  reference?: string;
  family?: string;
}

/** A normalised declaration, as stored in a plan: every field present, paths absolute. */
export interface CommandDeclaration {
  id: string;
  command: string[];
  cwd: string;
  quantity: Quantity;
  /** [min, max]; max null for any dimension (JSON has no Infinity). */
  dims: [number, number | null];
  settings: SettingSpec[];
  tuning: Record<string, (number | string)[]>;
  summary: string;
  reference: string;
  family: string;
}

/**
 * Splits a command line into words as a POSIX shell would for plain words, quotes and backslashes, and
 * nothing else: no variables, globs or pipes, since the command runs without a shell.
 */
export function splitCommandLine(text: string, where: string): string[] {
  const words: string[] = [];
  let word = '';
  let inWord = false;
  let quote: '"' | "'" | null = null;
  for (let i = 0; i < text.length; i++) {
    const ch = text[i];
    if (quote === "'") {
      if (ch === "'") quote = null;
      else word += ch;
    } else if (quote === '"') {
      if (ch === '"') quote = null;
      else if (ch === '\\' && i + 1 < text.length && '"\\$`'.includes(text[i + 1])) word += text[++i];
      else word += ch;
    } else if (ch === "'" || ch === '"') {
      quote = ch;
      inWord = true;
    } else if (ch === '\\' && i + 1 < text.length) {
      word += text[++i];
      inWord = true;
    } else if (/\s/.test(ch)) {
      if (inWord) words.push(word);
      word = '';
      inWord = false;
    } else {
      word += ch;
      inWord = true;
    }
  }
  if (quote) throw new UsageError(`${where}: the ${quote === '"' ? 'double' : 'single'} quote opened in "${text}" is never closed`);
  if (inWord) words.push(word);
  return words;
}

/** `ID=PROGRAM ARG...` from `--estimator-command`. */
export function parseCommandOption(text: string): CommandInput {
  const eq = text.indexOf('=');
  const id = eq < 0 ? '' : text.slice(0, eq).trim();
  if (eq > 0 && id !== '' && !/\s/.test(id) && !ID_PATTERN.test(id)) {
    throw new UsageError(`--estimator-command "${text}": id "${id}" is not allowed; an id is lowercase letters and digits in hyphenated words, e.g. "my-kl"`);
  }
  if (eq <= 0 || !ID_PATTERN.test(id)) {
    throw new UsageError(`--estimator-command "${text}" is not ID=PROGRAM [ARG...]; e.g. --estimator-command 'my-kl=python3 my_kl.py'`);
  }
  return { id, command: text.slice(eq + 1) };
}

function settingSpec(owner: string, name: string, input: CommandSettingInput): SettingSpec {
  if (typeof input === 'number') {
    if (!Number.isFinite(input)) throw new UsageError(`${owner}: settings.${name}: the default must be a finite number or a string`);
    return { name, kind: Number.isInteger(input) ? 'integer' : 'number', default: input, meaning: 'declared by the command' };
  }
  if (typeof input === 'string') return { name, kind: 'choice', choices: [input], default: input, meaning: 'declared by the command' };
  if (input === null || typeof input !== 'object' || !('default' in input)) {
    throw new UsageError(
      `${owner}: settings.${name}: give its default (a number or a string) or an object with "default" and optionally kind, min, max, choices, meaning`,
    );
  }
  const kind = input.kind ?? (typeof input.default === 'string' ? 'choice' : Number.isInteger(input.default) ? 'integer' : 'number');
  const choices = input.choices ?? (kind === 'choice' && typeof input.default === 'string' ? [input.default] : undefined);
  return { name, meaning: input.meaning ?? 'declared by the command', ...input, kind, default: input.default, ...(choices ? { choices } : {}) };
}

/** Normalises one declaration; `baseDir` resolves a relative cwd, `quantity` is the plan's. */
export function normalizeCommand(input: CommandInput, quantity: Quantity, baseDir: string, where: string): CommandDeclaration {
  const owner = `${where}: estimator command "${input.id}"`;
  if (typeof input.id !== 'string' || !ID_PATTERN.test(input.id)) {
    throw new UsageError(
      `${where}: estimator command id ${showValue(input.id)} is not allowed; an id is lowercase letters and digits in hyphenated words, e.g. "my-method"`,
    );
  }
  const command = typeof input.command === 'string' ? splitCommandLine(input.command, owner) : input.command;
  if (!Array.isArray(command) || !command.length || command.some((w) => typeof w !== 'string') || command[0] === '') {
    throw new UsageError(`${owner}: "command" must name a program, e.g. ["python3", "my_kl.py"]`);
  }
  const cwd = input.cwd === undefined ? baseDir : isAbsolute(input.cwd) ? input.cwd : resolve(baseDir, input.cwd);
  if (!existsSync(cwd) || !statSync(cwd).isDirectory()) throw new UsageError(`${owner}: its working folder ${cwd} does not exist`);
  const missing = programProblem(command[0], cwd);
  if (missing) throw new UsageError(`${owner}: ${missing}`);
  const dims = input.dims ?? [1, null];
  if (!Number.isInteger(dims[0]) || dims[0] < 1 || (dims[1] !== null && (!Number.isInteger(dims[1]) || dims[1] < dims[0]))) {
    throw new UsageError(`${owner}: dims ${showValue(dims)} is not allowed; give [min, max] with 1 ≤ min ≤ max, or [min, null] for any dimension above min`);
  }
  const settings = Object.entries(input.settings ?? {}).map(([name, value]) => settingSpec(owner, name, value));
  return {
    id: input.id,
    command,
    cwd,
    quantity: input.quantity ?? quantity,
    dims: [dims[0], dims[1]],
    settings,
    tuning: input.tuning ?? {},
    summary: input.summary ?? `estimator command: ${command.join(' ')}`,
    reference: input.reference ?? 'declared by the command (an external program)',
    family: input.family ?? 'external',
  };
}

/**
 * Why `program` cannot be started from `cwd`, or null when it can: a program that is missing or not executable
 * would fail every estimate of the run, so a typo is a usage mistake, said before anything runs. This looks where
 * spawn looks: a name with a slash from the working folder, a bare name on PATH. It cannot see every failure (a
 * script whose interpreter is missing is found here and fails when started; that stays a failure of each
 * estimate, with its reason).
 */
export function programProblem(program: string, cwd: string, path = process.env.PATH ?? ''): string | null {
  if (process.platform === 'win32') return null; // PATHEXT and the like: left to spawn
  const usable = (file: string): 'yes' | 'not executable' | 'no' => {
    try {
      if (!statSync(file).isFile()) return 'no';
    } catch {
      return 'no';
    }
    try {
      accessSync(file, constants.X_OK);
      return 'yes';
    } catch {
      return 'not executable';
    }
  };
  if (program.includes('/')) {
    const file = resolve(cwd, program);
    const found = usable(file);
    if (found === 'yes') return null;
    if (found === 'not executable') return `its program ${file} is not executable (chmod +x ${file})`;
    return existsSync(file) ? `its program ${program} (${file}) is not a file` : `its program ${program} (${file}) does not exist`;
  }
  let nonExecutable: string | null = null;
  for (const folder of path.split(delimiter)) {
    const file = resolve(cwd, folder || '.', program);
    const found = usable(file);
    if (found === 'yes') return null;
    if (found === 'not executable') nonExecutable ??= file;
  }
  if (nonExecutable) return `its program ${program} is found on PATH only as ${nonExecutable}, which is not executable`;
  return `its program ${program} is not found on PATH; give its path, or install it`;
}

/**
 * sha256 over the declaration and the content of every file its arguments name (relative to its working
 * folder): an edited script changes the fingerprint, as an edited module does. The program itself (python3)
 * is not read.
 */
export function commandDigest(declaration: CommandDeclaration): string {
  const hash = createHash('sha256').update(JSON.stringify(declaration));
  for (const word of declaration.command.slice(1)) {
    const path = resolve(declaration.cwd, word);
    try {
      if (existsSync(path) && statSync(path).isFile()) hash.update(`\0${word}\0`).update(readFileSync(path));
    } catch {
      // An unreadable file is named by its path alone; the command will report it when it starts.
    }
  }
  return hash.digest('hex');
}
