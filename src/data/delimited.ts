/**
 * CSV, TSV and other delimited text to a sample.
 *
 * - Header: the first record is a header when at least one field is text and none is a number; names may
 *   be quoted (RFC 4180). A first row such as `1,abc,3` is data, so a typo is reported rather than a row
 *   silently lost.
 * - Accepted around the data: a UTF-8 byte order mark, LF, CRLF or CR line ends, whole-line `#` comments
 *   anywhere, blank lines before the first record and at the end. A blank line between data rows is an
 *   error, since it usually marks a missing value. A header written as a comment (numpy.savetxt's
 *   `# x y`) is skipped like any comment, so such columns are selected by position.
 * - Every selected field must be a finite decimal number; columns left out by a selection are not read, so a
 *   text column (subject ids, labels) can sit beside the numbers.
 */
import { readSync } from 'node:fs';
import { UsageError } from '../core/errors.js';
import { resolveColumns } from './columns.js';
import { DecimalReader, describeBadNumber, looksLikeMissing, parseDecimalText } from './numbers.js';
import {
  type ByteSource,
  RecordScanner,
  SNIFF_BYTES,
  UNQUOTED,
  delimiterBytes,
  delimiterNames,
  sniffDelimiter,
  type Delimiter,
  type RecordKind,
} from './records.js';
import { defaultSource, describeColumn, positionalNames, type DataTable, type ParseOptions } from './table.js';

export type { Delimiter } from './records.js';

export interface DelimitedOptions extends ParseOptions {
  /** Leave out to guess from the first lines (tab, semicolon, comma, else runs of spaces). */
  delimiter?: Delimiter;
}

export interface DelimitedTable extends DataTable {
  delimiter: Delimiter;
  /** 1-based line of the header row, or 0 when there is none. */
  headerLine: number;
}

/** Parses delimited text (a string, or bytes holding UTF-8). */
export function parseDelimited(input: string | Uint8Array, options: DelimitedOptions = {}): DelimitedTable {
  const bytes = typeof input === 'string' ? Buffer.from(input, 'utf8') : Buffer.from(input.buffer, input.byteOffset, input.byteLength);
  return readDelimited(bytes, options);
}

/**
 * Bytes read per step from a file. Large enough that the fixed cost per window is nothing (and above the
 * 64 KiB the delimiter guess looks at), small enough to stay in cache-friendly sizes: 4 MiB read a 200 MB
 * CSV as fast as 16 and 64 MiB (bench/large-file.ts).
 */
export const FILE_WINDOW_BYTES = 4 << 20;

/**
 * Parses a delimited text file through a window of FILE_WINDOW_BYTES, so the file is never in memory as a
 * whole: the values go straight into a typed array, which is all that stays. `onProgress` hears the bytes
 * read so far after each window.
 */
export function readDelimitedFile(
  fd: number,
  size: number,
  options: DelimitedOptions & { onProgress?: (bytesRead: number, totalBytes: number) => void; windowBytes?: number } = {},
): DelimitedTable {
  let offset = 0;
  const more: ByteSource = {
    fill(target, at) {
      const read = readSync(fd, target, at, target.length - at, offset);
      offset += read;
      options.onProgress?.(offset, size);
      return read;
    },
    remaining: () => Math.max(0, size - offset),
  };
  // The delimiter guess looks at the first 64 KiB, so a file whose delimiter is guessed starts with that much.
  const windowBytes = Math.max(options.windowBytes ?? FILE_WINDOW_BYTES, options.delimiter === undefined ? SNIFF_BYTES : 1);
  const first = Buffer.allocUnsafe(Math.max(1, Math.min(windowBytes, size)));
  let filled = 0;
  while (filled < first.length) {
    const read = more.fill(first, filled);
    if (read === 0) break;
    filled += read;
  }
  return readDelimited(first.subarray(0, filled), options, offset < size ? more : undefined, first);
}

/** The checks on the start of the input, then the reader; `more` continues a file past `bytes`. */
function readDelimited(bytes: Buffer, options: DelimitedOptions, more?: ByteSource, window?: Buffer): DelimitedTable {
  const source = options.source ?? defaultSource;
  const start = bytes.length >= 3 && bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf ? 3 : 0;
  if (bytes.length >= 2 && ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff))) {
    throw new UsageError(`${source} is UTF-16 text; save it as UTF-8 (or plain ASCII) text`);
  }
  const probeEnd = Math.min(bytes.length, start + 4096);
  for (let i = start; i < probeEnd; i++) {
    if (bytes[i] === 0) throw new UsageError(`${source} contains zero bytes: it looks like a binary file, not delimited text`);
  }
  const delimiter = options.delimiter ?? sniffDelimiter(bytes, start);
  // A file's first window is scanned in the whole allocated buffer, which later windows reuse.
  const scanner = new RecordScanner(more && window ? window : bytes, start, delimiter, source, more, bytes.length);
  return new DelimitedReader(scanner, delimiter, source, options.columns).read();
}

class DelimitedReader {
  private names: string[] | null = null;
  private headerLine = 0;
  private firstDataLine = 0;
  private fieldsPerRow = 0;
  /** For each field of a row, where it goes in the output row, or -1 when it is not selected. */
  private slots = new Int32Array(0);
  /** The selected fields, 0-based, in output order. */
  private selected: number[] = [];
  private readonly decimals: DecimalReader;
  private dim = 0;
  private values = new Float64Array(0);
  private rows = 0;
  private windowMoves = 0;

  constructor(
    private readonly scanner: RecordScanner,
    private readonly delimiter: Delimiter,
    private readonly source: string,
    private readonly columns: string | undefined,
  ) {
    this.decimals = new DecimalReader(scanner.bytes);
  }

  read(): DelimitedTable {
    const scanner = this.scanner;
    let kind = this.skipBlanks();
    if (kind === 'end') throw this.nothingToRead();
    if (this.isHeader()) {
      this.headerLine = scanner.recordLine;
      this.names = [];
      for (let k = 0; k < scanner.fieldCount; k++) this.names.push(scanner.fieldText(k).trim());
      // A header saved in Latin-1 (été) decodes to replacement characters: names nobody could type back.
      const garbled = this.names.find((name) => name.includes('\uFFFD'));
      if (garbled !== undefined) {
        throw new UsageError(
          `${this.source} line ${this.headerLine}: the header name "${garbled}" is not valid UTF-8 (Latin-1 or another older encoding?); save the file as UTF-8`,
        );
      }
      kind = this.skipBlanks();
      if (kind === 'end') {
        throw new UsageError(`${this.source} has a header row (line ${this.headerLine}) but no data rows; expected rows of numbers below it`);
      }
    }
    this.startData();
    let blankLine = 0;
    for (;;) {
      if (kind === 'record') {
        if (blankLine !== 0) {
          throw new UsageError(
            `${this.source} line ${blankLine} is blank; blank lines are allowed only before the first row and at the end (write the missing value or drop the row)`,
          );
        }
        this.readRow();
      } else if (kind === 'blank') {
        if (blankLine === 0) blankLine = scanner.recordLine;
      } else {
        break;
      }
      kind = scanner.next();
    }
    return this.result();
  }

  private skipBlanks(): RecordKind {
    let kind: RecordKind;
    do kind = this.scanner.next();
    while (kind === 'blank');
    return kind;
  }

  private nothingToRead(): UsageError {
    if (this.scanner.sawComment) return new UsageError(`${this.source} has no data rows, only comment lines; expected rows of numbers`);
    return new UsageError(`${this.source} is empty; expected rows of numbers, optionally below a header row`);
  }

  /** A header has text in some field and a number in none (missing-value markers such as NA do not count). */
  private isHeader(): boolean {
    const scanner = this.scanner;
    let text = false;
    for (let k = 0; k < scanner.fieldCount; k++) {
      const value = this.fieldValue(k);
      if (Number.isFinite(value)) return false;
      if (!looksLikeMissing(scanner.fieldText(k))) text = true;
    }
    return text;
  }

  private fieldValue(k: number): number {
    const scanner = this.scanner;
    return scanner.fieldQuoting[k] === UNQUOTED ? this.decimals.read(scanner.fieldStart[k], scanner.fieldEnd[k]) : parseDecimalText(scanner.fieldText(k));
  }

  /** Fixes the row width from the first data row and resolves the column selection. */
  private startData(): void {
    const scanner = this.scanner;
    this.firstDataLine = scanner.recordLine;
    this.fieldsPerRow = scanner.fieldCount;
    if (this.names !== null && this.names.length !== this.fieldsPerRow) {
      throw new UsageError(
        `${this.source} line ${this.firstDataLine} has ${this.fieldsPerRow} field${this.fieldsPerRow === 1 ? '' : 's'}; the header (line ${this.headerLine}) has ${this.names.length}${this.splitHint()}`,
      );
    }
    const selected =
      this.columns === undefined
        ? Array.from({ length: this.fieldsPerRow }, (_, j) => j)
        : resolveColumns(this.columns, this.names, this.fieldsPerRow, this.source);
    this.dim = selected.length;
    this.slots = new Int32Array(this.fieldsPerRow).fill(-1);
    selected.forEach((field, slot) => {
      this.slots[field] = slot;
    });
    this.selected = selected;
    // Size the output from the first row's width in bytes; doubling covers a bad guess.
    const rowBytes = Math.max(2, scanner.fieldEnd[scanner.fieldCount - 1] - scanner.fieldStart[0] + 1);
    const expectedRows = 1 + Math.ceil(scanner.remainingBytes() / rowBytes);
    this.values = new Float64Array(Math.max(64, Math.ceil(expectedRows * 1.05) + 16) * this.dim);
  }

  private readRow(): void {
    const scanner = this.scanner;
    if (scanner.windowMoves !== this.windowMoves) {
      this.windowMoves = scanner.windowMoves;
      this.decimals.reset(scanner.bytes);
    }
    const fieldCount = scanner.fieldCount;
    if (fieldCount !== this.fieldsPerRow) {
      throw new UsageError(
        `${this.source} line ${scanner.recordLine} has ${fieldCount} field${fieldCount === 1 ? '' : 's'}; the first data row (line ${this.firstDataLine}) has ${this.fieldsPerRow}${this.splitHint()}`,
      );
    }
    const dim = this.dim;
    const base = this.rows * dim;
    if (base + dim > this.values.length) {
      const grown = new Float64Array(this.values.length * 2);
      grown.set(this.values);
      this.values = grown;
    }
    const values = this.values;
    const slots = this.slots;
    const decimals = this.decimals;
    const starts = scanner.fieldStart;
    const ends = scanner.fieldEnd;
    const quoting = scanner.fieldQuoting;
    for (let k = 0; k < fieldCount; k++) {
      const slot = slots[k];
      if (slot < 0) continue;
      const value = quoting[k] === UNQUOTED ? decimals.read(starts[k], ends[k]) : parseDecimalText(scanner.fieldText(k));
      // NaN and ±Infinity both fail this test; finite values pass.
      if (value - value !== 0) throw this.badField(k);
      values[base + slot] = value;
    }
    this.rows++;
  }

  private badField(k: number): UsageError {
    const scanner = this.scanner;
    const text = scanner.fieldText(k);
    const name = this.names?.[k];
    let hint = '';
    if (!looksLikeMissing(text)) {
      if (scanner.recordLine === this.firstDataLine && this.headerLine === 0) {
        hint = ' (the first row is read as a header only when none of its fields is a number)';
      } else {
        hint = this.splitHint(text);
        if (hint === '' && this.columns === undefined && this.fieldsPerRow > 1) {
          const others = this.selected.filter((j) => j !== k);
          hint = ` (to leave a text column out, select the others, e.g. --columns ${formatPositions(others)})`;
        }
      }
    }
    return new UsageError(`${this.source} line ${scanner.recordLine}, ${describeColumn(k + 1, name)}: ${describeBadNumber(text)}${hint}`);
  }

  /** When the wrong delimiter is likely, says what the fields were split at and what they contain. */
  private splitHint(text?: string): string {
    const scanner = this.scanner;
    const sample = text ?? scanner.bytes.toString('utf8', scanner.fieldStart[0], scanner.fieldEnd[scanner.fieldCount - 1]);
    for (const other of ['tab', 'semicolon', 'comma'] as const) {
      if (other !== this.delimiter && sample.includes(String.fromCharCode(delimiterBytes[other]))) {
        return ` (fields are split at ${delimiterNames[this.delimiter]}; this row contains ${delimiterNames[other]})`;
      }
    }
    return '';
  }

  /**
   * The values read, exactly n·d long: a view of the output array when little of it is unused, so a large
   * file's values are not held twice at the end; a copy otherwise.
   */
  private trimmedValues(): Float64Array {
    const used = this.rows * this.dim;
    return used >= 0.875 * this.values.length ? this.values.subarray(0, used) : this.values.slice(0, used);
  }

  private result(): DelimitedTable {
    const names = this.names;
    const inputNames = names ?? positionalNames(this.fieldsPerRow);
    return {
      sample: { n: this.rows, dim: this.dim, data: this.trimmedValues() },
      columnNames: this.selected.map((j) => (inputNames[j] === '' ? `column ${j + 1}` : inputNames[j])),
      columnNumbers: this.selected.map((j) => j + 1),
      namedColumns: names !== null,
      inputColumns: this.fieldsPerRow,
      delimiter: this.delimiter,
      headerLine: this.headerLine,
    };
  }
}

/** 0-based indices as a 1-based selection spec with ranges: [0, 2, 3, 4] -> "1,3-5". */
function formatPositions(indices: readonly number[]): string {
  const parts: string[] = [];
  for (let a = 0; a < indices.length;) {
    let b = a;
    while (b + 1 < indices.length && indices[b + 1] === indices[b] + 1) b++;
    parts.push(b > a ? `${indices[a] + 1}-${indices[b] + 1}` : `${indices[a] + 1}`);
    a = b + 1;
  }
  return parts.join(',');
}
