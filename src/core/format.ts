import Table from 'cli-table3';

export type Base = 'nats' | 'bits';

/** Converts a value in nats to the output base; entropies are computed in nats everywhere else. */
export function toBase(nats: number, base: Base): number {
  return base === 'bits' ? nats / Math.LN2 : nats;
}

/** Fixed significant digits without exponent noise for everyday magnitudes. */
export function formatValue(x: number | undefined, digits = 6): string {
  if (x === undefined || Number.isNaN(x)) return '–';
  if (!Number.isFinite(x)) return x > 0 ? '∞' : '−∞';
  if (x === 0) return '0';
  const magnitude = Math.abs(x);
  if (magnitude >= 1e6 || magnitude < 1e-4) return x.toExponential(digits - 1);
  return x.toFixed(Math.max(0, digits - 1 - Math.floor(Math.log10(magnitude))));
}

/** A plain bordered table; colours off so output pipes cleanly. */
export function renderTable(head: string[], rows: (string | number)[][], options: { align?: ('left' | 'right')[]; wrap?: number[] } = {}): string {
  const table = new Table({
    head,
    style: { head: [], border: [], compact: true },
    colAligns: options.align ?? [],
    wordWrap: true,
    colWidths: options.wrap ? options.wrap.map((w) => (w > 0 ? w : null)) : [],
  });
  for (const row of rows) table.push(row.map(String));
  return table.toString();
}

/** Truncates long text for a table cell. */
export function shorten(text: string, max: number): string {
  return text.length <= max ? text : `${text.slice(0, max - 1)}…`;
}
