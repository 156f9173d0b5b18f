/**
 * Column selection: `--columns 1,3`, `--columns 2-4`, `--columns x,y`, or a mix such as `1,y`.
 *
 * - Numbers are 1-based positions in the file; `a-b` is the inclusive range a..b.
 * - Any other part is a header name, matched exactly (case and inner spaces count); surrounding spaces
 *   in the spec are ignored. A part made only of digits (or digits-dash-digits) is always a position.
 * - Columns come out in the order written, so `3,1` puts column 3 first; naming a column twice is an error.
 */
import { selectColumns } from '../core/sample.js';
import { UsageError } from '../core/errors.js';
import { showText, type DataTable } from './table.js';

const positionPattern = /^\d+$/;
const rangePattern = /^(\d+)\s*-\s*(\d+)$/;

/**
 * The 0-based column indices a selection spec names, in the order written.
 * `names` is null when the input has no header (then only positions are allowed).
 */
export function resolveColumns(spec: string, names: readonly string[] | null, columnCount: number, source: string): number[] {
  const parts = spec.split(',').map((part) => part.trim());
  if (spec.trim() === '' || parts.some((part) => part === '')) {
    throw new UsageError(
      `${source}: column selection ${showText(spec)} has an empty part; give positions such as 1,3 or 2-4 (counting from 1), or header names`,
    );
  }
  const indices: number[] = [];
  const selected = new Set<number>();
  const add = (index: number, part: string): void => {
    if (selected.has(index)) {
      throw new UsageError(`${source}: column selection ${showText(spec)} selects column ${index + 1} twice (at "${part}")`);
    }
    selected.add(index);
    indices.push(index);
  };
  const checkPosition = (position: number): void => {
    if (position < 1) throw new UsageError(`${source}: column 0 does not exist; columns are numbered from 1`);
    if (position > columnCount) {
      throw new UsageError(`${source}: column ${position} does not exist; the file has ${columnCount} column${columnCount === 1 ? '' : 's'}`);
    }
  };
  for (const part of parts) {
    const range = rangePattern.exec(part);
    if (positionPattern.test(part)) {
      const position = Number(part);
      checkPosition(position);
      add(position - 1, part);
    } else if (range) {
      const from = Number(range[1]);
      const to = Number(range[2]);
      if (from > to) throw new UsageError(`${source}: column range "${part}" runs backwards; write ${to}-${from}`);
      checkPosition(from);
      checkPosition(to);
      for (let position = from; position <= to; position++) add(position - 1, part);
    } else {
      add(findName(part, names, source), part);
    }
  }
  return indices;
}

/** How many columns a selection spec names (each name one, a range its length); the spec is checked when resolved. */
export function selectionWidth(spec: string): number {
  return spec.split(',').reduce((width, part) => {
    const range = rangePattern.exec(part.trim());
    return width + (range ? Math.max(1, Number(range[2]) - Number(range[1]) + 1) : 1);
  }, 0);
}

/**
 * A part two selections share, written the same way (the same name, or overlapping positions), or undefined.
 * A name in one and the position of that column in the other is caught when the joined spec is resolved.
 */
export function sharedSelection(a: string, b: string): string | undefined {
  const expand = (spec: string) =>
    spec.split(',').flatMap((raw) => {
      const part = raw.trim();
      const range = rangePattern.exec(part);
      if (!range) return [part];
      return Array.from({ length: Math.max(0, Number(range[2]) - Number(range[1]) + 1) }, (_, i) => String(Number(range[1]) + i));
    });
  const first = new Set(expand(a));
  return expand(b).find((part) => first.has(part));
}

function findName(name: string, names: readonly string[] | null, source: string): number {
  if (names === null) {
    throw new UsageError(
      `${source}: no column named ${showText(name)}: the file has no header row, so select columns by position (1, 2, ... or a range such as 2-4)`,
    );
  }
  const matches: number[] = [];
  names.forEach((candidate, j) => {
    if (candidate === name) matches.push(j);
  });
  if (matches.length > 1) {
    throw new UsageError(
      `${source}: column name ${showText(name)} is ambiguous: columns ${matches.map((j) => j + 1).join(' and ')} share it; select by position`,
    );
  }
  if (matches.length === 1) return matches[0];
  const folded = names.map((candidate) => candidate.toLowerCase()).indexOf(name.toLowerCase());
  const hint = folded >= 0 ? ` (did you mean ${showText(names[folded])}?)` : '';
  throw new UsageError(`${source}: no column named ${showText(name)}${hint}; the columns are ${listNames(names)}`);
}

function listNames(names: readonly string[]): string {
  const shown = names.slice(0, 12).map((name) => showText(name));
  return names.length > 12 ? `${shown.join(', ')} and ${names.length - 12} more` : shown.join(', ');
}

/** A table reduced to the columns a spec selects (for readers that parse every column anyway). */
export function selectTableColumns(table: DataTable, spec: string, source: string): DataTable {
  if (table.sample.dim !== table.inputColumns) throw new RangeError('selectTableColumns needs an unselected table');
  const indices = resolveColumns(spec, table.namedColumns ? table.columnNames : null, table.inputColumns, source);
  return {
    sample: selectColumns(table.sample, indices),
    columnNames: indices.map((j) => table.columnNames[j]),
    columnNumbers: indices.map((j) => table.columnNumbers[j]),
    namedColumns: table.namedColumns,
    inputColumns: table.inputColumns,
  };
}
