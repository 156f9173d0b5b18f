/**
 * Load times for the data readers at 10^6 rows. Run alone with `npx tsx bench/data.ts`.
 * Target from the brief: a 10^6-row CSV in about a second.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { findRepeats, readSample } from '../src/data/index.js';
import { rngFromSeed } from '../src/core/rng.js';

const rows = 1_000_000;

function normalPair(rng: () => number): [number, number] {
  const radius = Math.sqrt(-2 * Math.log(1 - rng()));
  const angle = 2 * Math.PI * rng();
  return [radius * Math.cos(angle), radius * Math.sin(angle)];
}

/** Row-major values for `rows` × `dim`, drawn once and shared by every format. */
function makeValues(dim: number): Float64Array {
  const rng = rngFromSeed('bench-data');
  const values = new Float64Array(rows * dim);
  for (let i = 0; i < values.length; i += 2) {
    const [a, b] = normalPair(rng);
    values[i] = a;
    if (i + 1 < values.length) values[i + 1] = b;
  }
  return values;
}

function delimitedText(values: Float64Array, dim: number, delimiter: string, format: (x: number) => string): string {
  const lines: string[] = [Array.from({ length: dim }, (_, j) => `x${j + 1}`).join(delimiter)];
  for (let i = 0; i < rows; i++) {
    const fields: string[] = [];
    for (let j = 0; j < dim; j++) fields.push(format(values[i * dim + j]));
    lines.push(fields.join(delimiter));
  }
  return `${lines.join('\n')}\n`;
}

/** A version 1.0 .npy of little-endian doubles, laid out as NumPy's format description says. */
/** A NumPy .npy file (format 1.0, little-endian float64, C order) of row-major values, `dim` columns. */
export function npyBytes(values: Float64Array, dim: number): Buffer {
  let header = `{'descr': '<f8', 'fortran_order': False, 'shape': (${values.length / dim}, ${dim}), }`;
  const total = 10 + header.length + 1;
  header += ' '.repeat((64 - (total % 64)) % 64) + '\n';
  const prefix = Buffer.alloc(10);
  Buffer.from([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]).copy(prefix);
  prefix.writeUInt16LE(header.length, 8);
  const data = Buffer.alloc(values.length * 8);
  for (let i = 0; i < values.length; i++) data.writeDoubleLE(values[i], i * 8);
  return Buffer.concat([prefix, Buffer.from(header, 'latin1'), data]);
}

function time<T>(run: () => T): { result: T; seconds: number } {
  const start = process.hrtime.bigint();
  const result = run();
  return { result, seconds: Number(process.hrtime.bigint() - start) / 1e9 };
}

export async function benchData(): Promise<string[]> {
  const dir = mkdtempSync(join(tmpdir(), 'hhat-bench-data-'));
  const lines: string[] = [];
  try {
    const dim = 3;
    const values = makeValues(dim);
    const cases: Array<{ label: string; file: string; content: string | Buffer }> = [
      {
        label: 'CSV, 3 columns, 6 significant digits',
        file: 'short.csv',
        content: delimitedText(values, dim, ',', (x) => x.toPrecision(6)),
      },
      {
        label: 'CSV, 3 columns, shortest round-trip (up to 17 digits)',
        file: 'full.csv',
        content: delimitedText(values, dim, ',', (x) => String(x)),
      },
      {
        label: 'TSV, 3 columns, 6 significant digits',
        file: 'short.tsv',
        content: delimitedText(values, dim, '\t', (x) => x.toPrecision(6)),
      },
      {
        label: 'TXT, spaces sniffed, 3 columns, %.18e as numpy.savetxt writes',
        file: 'savetxt.txt',
        content: delimitedText(values, dim, ' ', (x) => x.toExponential(18)),
      },
      {
        label: 'JSON rows, 3 columns, shortest round-trip',
        file: 'rows.json',
        content: JSON.stringify(Array.from({ length: rows }, (_, i) => Array.from(values.subarray(i * dim, i * dim + dim)))),
      },
      { label: 'NPY <f8, 3 columns', file: 'values.npy', content: npyBytes(values, dim) },
    ];
    for (const { label, file, content } of cases) {
      const path = join(dir, file);
      writeFileSync(path, content);
      const megabytes = (typeof content === 'string' ? Buffer.byteLength(content) : content.length) / 1e6;
      readSample(path); // warm-up, so the timing is of the reader rather than of compilation
      const { result, seconds } = time(() => readSample(path));
      let mismatch = 0;
      for (let i = 0; i < values.length; i++) {
        if (Math.abs(result.sample.data[i] - values[i]) > 1e-5 * Math.max(1, Math.abs(values[i]))) mismatch++;
      }
      lines.push(
        `readSample ${label}: ${rows} rows, ${megabytes.toFixed(1)} MB in ${seconds.toFixed(3)} s` +
          ` (${(megabytes / seconds).toFixed(0)} MB/s)${mismatch ? `; ${mismatch} VALUES DIFFER` : ''}`,
      );
    }
    const rounded = values.map((x) => Math.round(x * 100) / 100);
    const { result: report, seconds } = time(() => findRepeats({ n: rows, dim, data: rounded }));
    lines.push(
      `findRepeats: ${rows} rows × ${dim} columns rounded to 0.01 in ${seconds.toFixed(3)} s` +
        ` (column 1: ${report.columns[0].distinct} distinct, ${report.repeatedRows} repeated rows)`,
    );
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  return lines;
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  for (const line of await benchData()) console.log(line);
}
