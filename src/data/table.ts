import type { Sample } from '../core/contracts.js';

/**
 * What every reader returns: the numbers, plus enough about where they came from to name columns in
 * messages and reports.
 */
export interface DataTable {
  sample: Sample;
  /**
   * One name per sample column, in sample order: the header's names when the input has them, otherwise
   * "column 1", "column 2"... by position in the input.
   */
  columnNames: string[];
  /** 1-based position of each sample column in the input, so messages can point back at the file. */
  columnNumbers: number[];
  /** Whether the names came from the input (a header row, JSON keys) rather than being made up. */
  namedColumns: boolean;
  /** How many columns the input has before any selection. */
  inputColumns: number;
}

/** Options shared by the string- and buffer-level parsers. */
export interface ParseOptions {
  /** Names the input in messages, e.g. the file path; defaults to "input". */
  source?: string;
  /** A column selection such as "1,3", "2-4" or "x,y" (see `resolveColumns`). */
  columns?: string;
}

export const defaultSource = 'input';

/** A field's text for a one-line message: quoted, control characters escaped, long text cut short. */
export function showText(text: string): string {
  const limit = 40;
  const cut = text.length > limit ? `${text.slice(0, limit)}…` : text;
  return JSON.stringify(cut);
}

export function positionalNames(count: number): string[] {
  const names = new Array<string>(count);
  for (let j = 0; j < count; j++) names[j] = `column ${j + 1}`;
  return names;
}

/** "column 2" or, when the input names it, `column 2 ("mass")`. */
export function describeColumn(number: number, name: string | undefined): string {
  return name === undefined || name === '' ? `column ${number}` : `column ${number} (${showText(name)})`;
}
