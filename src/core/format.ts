import Table from 'cli-table3';

export type Base = 'nats' | 'bits';

/** Converts a value in nats to the output base; entropies are computed in nats everywhere else. */
export function toBase(nats: number, base: Base): number {
  return base === 'bits' ? nats / Math.LN2 : nats;
}

/** Fixed significant digits without exponent noise for everyday magnitudes. */
export function formatValue(x: number | null | undefined, digits = 6): string {
  // null: a score no replicate could give (a run file writes NaN so), never −∞.
  if (x === undefined || x === null || Number.isNaN(x)) return '–';
  if (!Number.isFinite(x)) return x > 0 ? '∞' : '−∞';
  if (x === 0) return '0';
  const magnitude = Math.abs(x);
  if (magnitude >= 1e6 || magnitude < 1e-4) return x.toExponential(digits - 1);
  return x.toFixed(Math.max(0, digits - 1 - Math.floor(Math.log10(magnitude))));
}

/**
 * The longest unbroken word of a column: a wrapped column is never narrower, since the table library cuts a
 * word that does not fit its cell (an id, a family, a reference's URL would lose its end).
 */
function longestWord(head: string[], rows: (string | number)[][], column: number): number {
  let longest = 0;
  for (const text of [head[column], ...rows.map((row) => row[column])]) {
    for (const word of String(text ?? '').split(/\s+/)) longest = Math.max(longest, [...word].length);
  }
  return longest;
}

/** A plain bordered table; colours off so output pipes cleanly. */
export function renderTable(head: string[], rows: (string | number)[][], options: { align?: ('left' | 'right')[]; wrap?: number[] } = {}): string {
  const table = new Table({
    head,
    style: { head: [], border: [], compact: true },
    colAligns: options.align ?? [],
    wordWrap: true,
    colWidths: options.wrap ? options.wrap.map((w, i) => (w > 0 ? Math.max(w, longestWord(head, rows, i) + 2) : null)) : [],
  });
  for (const row of rows) table.push(row.map(String));
  return table.toString();
}

/** Truncates long text for a table cell. */
export function shorten(text: string, max: number): string {
  return text.length <= max ? text : `${text.slice(0, max - 1)}…`;
}

/** "1 scenario", "3 scenarios": a count with its noun in the right number (`plural` for irregular nouns). */
export function countOf(count: number, singular: string, plural = `${singular}s`): string {
  return `${count} ${count === 1 ? singular : plural}`;
}

/** Significant digits of a resolved setting in a table; JSON keeps every digit. */
export const SETTING_DIGITS = 4;

/**
 * A setting's value for a table: integers and words as they are, other numbers to SETTING_DIGITS significant
 * digits (a bandwidth of 0.41351855420001377 reads 0.4135), without trailing zeros.
 */
export function formatSetting(value: unknown): string {
  // Safe integers only: every double beyond 2^53 is an integer, and 2.370793044575606e+299 is a bandwidth.
  if (typeof value !== 'number' || Number.isSafeInteger(value) || !Number.isFinite(value)) return String(value);
  const rounded = value.toPrecision(SETTING_DIGITS);
  // Beyond 2^53, Number() would print 9.007e15 as 9007000000000000, a count it is not.
  return Math.abs(value) >= 2 ** 53 ? rounded : String(Number(rounded));
}

/**
 * Ids and specs are never cut in a table, since users copy them back into commands. One that fits `width`
 * goes in its cell; a longer one leaves a numbered marker there and is printed in full on its own line under
 * the table (`notes`, one per distinct id), where a terminal's selection picks it up whole.
 */
export function fullIds(ids: string[], width: number, marker: (id: string, number: number) => string): { cells: string[]; notes: string[] } {
  const numbers = new Map<string, number>();
  const notes: string[] = [];
  const cells = ids.map((id) => {
    if (id.length <= width) return id;
    let number = numbers.get(id);
    if (number === undefined) {
      number = numbers.size + 1;
      numbers.set(id, number);
      notes.push(`[${number}] ${id}`);
    }
    return marker(id, number);
  });
  return { cells, notes };
}

/** p-values: three decimals, or two significant digits below 0.001 (a paired test can reach 1e-40). */
export function formatP(p: number): string {
  if (!Number.isFinite(p)) return '–';
  if (p === 0) return '0';
  return p >= 0.001 ? p.toFixed(3) : p.toExponential(1);
}

/** 1st, 2nd, 3rd, 4th, …, 11th, 12th, 13th, 21st, … */
export function ordinal(n: number): string {
  const tens = n % 100;
  const suffix = tens >= 11 && tens <= 13 ? 'th' : (['th', 'st', 'nd', 'rd'][n % 10] ?? 'th');
  return `${n}${suffix}`;
}
