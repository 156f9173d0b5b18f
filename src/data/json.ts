/**
 * JSON to a sample. Accepted shapes:
 *
 *   [1.5, 2, 3]                          one column
 *   [[1, 2], [3, 4], [5, 6]]             rows of equal length
 *   {"x": [1, 3, 5], "y": [2, 4, 6]}     columns by name, of equal length
 *   [{"x": 1, "y": 2}, {"x": 3, "y": 4}] records with the same keys
 *
 * Rows are numbered from 1 in messages, with the 0-based index beside them for those reading the file
 * from code. Only selected columns are checked, so a label column can stay in the file.
 */
import { UsageError } from '../core/errors.js';
import { resolveColumns } from './columns.js';
import { locateJsonError } from './json-syntax.js';
import { defaultSource, describeColumn, positionalNames, showText, type DataTable, type ParseOptions } from './table.js';

const shapes = 'an array of numbers, an array of equal-length rows, or an object of equal-length columns';

export function parseJson(input: string | Uint8Array, options: ParseOptions = {}): DataTable {
  const source = options.source ?? defaultSource;
  let text = typeof input === 'string' ? input : Buffer.from(input.buffer, input.byteOffset, input.byteLength).toString('utf8');
  if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
  if (text.trim() === '') throw new UsageError(`${source} is empty; expected JSON: ${shapes}`);
  let root: unknown;
  try {
    root = JSON.parse(text);
  } catch {
    const problem = locateJsonError(text);
    if (problem === null) throw new UsageError(`${source} is not valid JSON`);
    throw new UsageError(`${source} line ${problem.line}, column ${problem.column}: invalid JSON: ${problem.problem}`);
  }
  const reader = new JsonReader(source, options.columns);
  if (Array.isArray(root)) {
    if (root.length === 0) throw new UsageError(`${source} holds an empty array; expected ${shapes}`);
    const first: unknown = root[0];
    if (typeof first === 'number') return reader.vector(root);
    if (Array.isArray(first)) return reader.rows(root);
    if (isObject(first)) return reader.records(root);
    throw new UsageError(`${source} row 1 (index [0]): ${describeJsonValue(first)}; expected ${shapes}`);
  }
  if (isObject(root)) {
    // hhat's own records are not samples: say which file to give rather than reject their keys one by one.
    if (root.kind === 'hhat-draw') {
      throw new UsageError(
        `${source} is a record written by hhat draw; its samples are read from the CSV or .npy form: draw again with --out FILE.csv (or .npy)`,
      );
    }
    if (root.kind === 'hhat-run') throw new UsageError(`${source} is an hhat run file, not a sample; give a data file (CSV/TSV/TXT, JSON or .npy)`);
    return reader.columnsByName(root);
  }
  throw new UsageError(`${source} holds ${kindOf(root)} at the top level; expected ${shapes}`);
}

function isObject(value: unknown): value is Record<string, unknown> {
  return typeof value === 'object' && value !== null && !Array.isArray(value);
}

function kindOf(value: unknown): string {
  if (Array.isArray(value)) return 'an array';
  if (value === null) return 'null';
  if (typeof value === 'object') return 'an object';
  if (typeof value === 'number') return 'a number';
  return `a ${typeof value}`;
}

/** Why a JSON value is not a usable number. */
function describeJsonValue(value: unknown): string {
  if (typeof value === 'number') return `${value} is not a finite number (it overflows a double)`;
  if (value === null) return 'null is not a finite number; remove or impute missing values';
  if (typeof value === 'string') return `${showText(value)} is a string; values must be JSON numbers, without quotes`;
  if (typeof value === 'boolean') return `${value} is not a number`;
  return `${kindOf(value)} is not a number`;
}

class JsonReader {
  constructor(
    private readonly source: string,
    private readonly columns: string | undefined,
  ) {}

  private select(names: string[] | null, count: number): number[] {
    return this.columns === undefined ? Array.from({ length: count }, (_, j) => j) : resolveColumns(this.columns, names, count, this.source);
  }

  private table(data: Float64Array, n: number, names: string[] | null, count: number, selected: number[]): DataTable {
    const inputNames = names ?? positionalNames(count);
    return {
      sample: { n, dim: selected.length, data },
      columnNames: selected.map((j) => inputNames[j]),
      columnNumbers: selected.map((j) => j + 1),
      namedColumns: names !== null,
      inputColumns: count,
    };
  }

  vector(values: unknown[]): DataTable {
    const selected = this.select(null, 1);
    const data = new Float64Array(values.length);
    for (let i = 0; i < values.length; i++) {
      const value = values[i];
      if (typeof value !== 'number' || !Number.isFinite(value)) {
        if (Array.isArray(value) || isObject(value)) throw this.mixed(i, value, 'a number');
        throw new UsageError(`${this.source} row ${i + 1} (index [${i}]): ${describeJsonValue(value)}`);
      }
      data[i] = value;
    }
    return this.table(data, values.length, null, 1, selected);
  }

  rows(rows: unknown[]): DataTable {
    const width = (rows[0] as unknown[]).length;
    if (width === 0) throw new UsageError(`${this.source} row 1 (index [0]) is an empty array; rows need at least one number`);
    const selected = this.select(null, width);
    const dim = selected.length;
    const data = new Float64Array(rows.length * dim);
    for (let i = 0; i < rows.length; i++) {
      const row = rows[i];
      if (!Array.isArray(row)) throw this.mixed(i, row, 'an array');
      if (row.length !== width) {
        throw new UsageError(`${this.source} row ${i + 1} (index [${i}]) has ${row.length} value${row.length === 1 ? '' : 's'}; the first row has ${width}`);
      }
      for (let slot = 0; slot < dim; slot++) {
        const j = selected[slot];
        const value: unknown = row[j];
        if (typeof value !== 'number' || !Number.isFinite(value)) {
          throw new UsageError(`${this.source} row ${i + 1}, column ${j + 1} (index [${i}][${j}]): ${describeJsonValue(value)}`);
        }
        data[i * dim + slot] = value;
      }
    }
    return this.table(data, rows.length, null, width, selected);
  }

  records(records: unknown[]): DataTable {
    const names = Object.keys(records[0] as Record<string, unknown>);
    if (names.length === 0) throw new UsageError(`${this.source} row 1 (index [0]) is an empty object; records need at least one key`);
    const selected = this.select(names, names.length);
    const dim = selected.length;
    const data = new Float64Array(records.length * dim);
    for (let i = 0; i < records.length; i++) {
      const record = records[i];
      if (!isObject(record)) throw this.mixed(i, record, 'an object');
      const keyCount = Object.keys(record).length;
      for (let slot = 0; slot < dim; slot++) {
        const j = selected[slot];
        const name = names[j];
        if (!Object.prototype.hasOwnProperty.call(record, name)) {
          throw new UsageError(`${this.source} row ${i + 1} (index [${i}]) has no key ${showText(name)}; the first row has it`);
        }
        const value = record[name];
        if (typeof value !== 'number' || !Number.isFinite(value)) {
          throw new UsageError(
            `${this.source} row ${i + 1}, ${describeColumn(j + 1, name)} (index [${i}][${JSON.stringify(name)}]): ${describeJsonValue(value)}`,
          );
        }
        data[i * dim + slot] = value;
      }
      if (keyCount !== names.length) {
        throw new UsageError(
          `${this.source} row ${i + 1} (index [${i}]) has ${keyCount} keys; the first row has ${names.length} (${names.map((name) => showText(name)).join(', ')})`,
        );
      }
    }
    return this.table(data, records.length, names, names.length, selected);
  }

  columnsByName(object: Record<string, unknown>): DataTable {
    const names = Object.keys(object);
    if (names.length === 0) throw new UsageError(`${this.source} holds an empty object; expected ${shapes}`);
    const selected = this.select(names, names.length);
    const dim = selected.length;
    let n = -1;
    let firstName = '';
    for (const j of selected) {
      const column = object[names[j]];
      if (!Array.isArray(column)) {
        throw new UsageError(
          `${this.source} key ${showText(names[j])} holds ${kindOf(column)}; in an object of columns each key must hold an array of numbers`,
        );
      }
      if (n < 0) {
        n = column.length;
        firstName = names[j];
      } else if (column.length !== n) {
        throw new UsageError(
          `${this.source} column ${showText(names[j])} has ${column.length} value${column.length === 1 ? '' : 's'}; column ${showText(firstName)} has ${n}`,
        );
      }
    }
    if (n === 0) throw new UsageError(`${this.source}: the columns are empty arrays; expected numbers`);
    const data = new Float64Array(n * dim);
    for (let slot = 0; slot < dim; slot++) {
      const j = selected[slot];
      const column = object[names[j]] as unknown[];
      for (let i = 0; i < n; i++) {
        const value = column[i];
        if (typeof value !== 'number' || !Number.isFinite(value)) {
          throw new UsageError(
            `${this.source} ${describeColumn(j + 1, names[j])}, row ${i + 1} (index [${JSON.stringify(names[j])}][${i}]): ${describeJsonValue(value)}`,
          );
        }
        data[i * dim + slot] = value;
      }
    }
    return this.table(data, n, names, names.length, selected);
  }

  /** An array that mixes numbers with rows (or rows with records). */
  private mixed(i: number, value: unknown, expected: string): UsageError {
    return new UsageError(
      `${this.source} row ${i + 1} (index [${i}]) is ${kindOf(value)} but row 1 is ${expected}; use either an array of numbers or an array of rows, not both`,
    );
  }
}
