/**
 * Splits delimited text into records and fields, straight from bytes. Quoting follows RFC 4180: a field
 * may be wrapped in double quotes, inside which the delimiter and line breaks are literal and `""` stands
 * for one quote. Lines end in LF, CRLF or a lone CR. Whole-line `#` comments are skipped.
 *
 * The scanner keeps field boundaries in reused arrays and never builds a string for a field unless asked,
 * so the numeric hot path touches only bytes. It reads either one buffer holding the whole input, or a file
 * through a window (`ByteSource`): a record that runs past the end of the window is scanned again once
 * the window has moved on, so a large file never has to be in memory at once.
 */
import { UsageError } from '../core/errors.js';

export type Delimiter = 'comma' | 'tab' | 'semicolon' | 'spaces';

export const delimiterBytes: Record<Delimiter, number> = { comma: 44, tab: 9, semicolon: 59, spaces: -1 };
export const delimiterNames: Record<Delimiter, string> = {
  comma: 'commas',
  tab: 'tabs',
  semicolon: 'semicolons',
  spaces: 'runs of spaces',
};

const LF = 10;
const CR = 13;
const SPACE = 32;
const TAB = 9;
const QUOTE = 34;
const HASH = 35;

/** The field holds raw bytes, quoted text, or quoted text with `""` escapes to undo. */
export const UNQUOTED = 0;
export const QUOTED = 1;
export const QUOTED_WITH_ESCAPES = 2;

export type RecordKind = 'record' | 'blank' | 'end';

/**
 * More of the input, for a scanner reading through a window: `fill` writes up to `target.length − offset`
 * bytes at `offset` and returns how many it wrote (0 at the end of the input).
 */
export interface ByteSource {
  fill(target: Buffer, offset: number): number;
  /** Bytes of the input not yet handed to `fill`, for sizing the output. */
  remaining(): number;
}

/** Thrown inside a scan that reached the end of a window before the end of its record. */
const INCOMPLETE = Symbol('incomplete record');

export class RecordScanner {
  /** Boundaries of the current record's fields (content only, without quotes), in `bytes`. */
  readonly fieldStart: number[] = [];
  readonly fieldEnd: number[] = [];
  readonly fieldQuoting: number[] = [];
  fieldCount = 0;
  /** 1-based line on which the current record (or blank line) starts. */
  recordLine = 0;
  /** Whether a `#` comment line was skipped (to tell a file of comments from an empty one). */
  sawComment = false;
  /** Counts the times the window moved: field positions and decoded text of an earlier window are stale. */
  windowMoves = 0;
  /** The window: the whole input, or the part of a file being scanned. Field positions index into it. */
  bytes: Buffer;
  private pos: number;
  private line = 1;
  private length: number;
  private readonly delimiter: number;
  /** No more input beyond `bytes`: a record may end at the end of the window. */
  private final: boolean;

  constructor(
    bytes: Buffer,
    start: number,
    delimiter: Delimiter,
    private readonly source: string,
    private readonly more?: ByteSource,
    /** How much of `bytes` holds input (a file's first window may be part filled). */
    length = bytes.length,
  ) {
    this.bytes = bytes;
    this.pos = start;
    this.length = length;
    this.delimiter = delimiterBytes[delimiter];
    this.final = more === undefined;
  }

  /** Bytes from the scan position to the end of the input. */
  remainingBytes(): number {
    return this.length - this.pos + (this.more ? this.more.remaining() : 0);
  }

  /** Advances to the next record, skipping comment lines; a blank line is reported so callers can place it. */
  next(): RecordKind {
    for (;;) {
      const from = this.pos;
      const line = this.line;
      try {
        const kind = this.scanNext();
        // Before the end of the input, a record is complete only when something follows its line end
        // (a CR at the end of the window may be the first half of CRLF).
        if (this.final || this.pos < this.length) return kind;
      } catch (error) {
        if (error !== INCOMPLETE) throw error;
      }
      this.pos = from;
      this.line = line;
      this.slide();
    }
  }

  /** Moves the window on: keeps the unfinished record, reads more after it (growing the window for a long record). */
  private slide(): void {
    const more = this.more!;
    const kept = this.length - this.pos;
    const window = kept > this.bytes.length / 2 ? Buffer.allocUnsafe(this.bytes.length * 2) : this.bytes;
    // Buffer#copy handles overlapping ranges, so the record can move to the front of its own window.
    this.bytes.copy(window, 0, this.pos, this.length);
    let filled = kept;
    while (filled < window.length) {
      const read = more.fill(window, filled);
      if (read === 0) {
        this.final = true;
        break;
      }
      filled += read;
    }
    this.bytes = window;
    this.pos = 0;
    this.length = filled;
    this.windowMoves++;
  }

  private scanNext(): RecordKind {
    const bytes = this.bytes;
    const length = this.length;
    for (;;) {
      if (this.pos >= length) {
        if (this.final) return 'end';
        // eslint-disable-next-line @typescript-eslint/only-throw-error -- a sentinel caught at the feed, no stack needed
        throw INCOMPLETE;
      }
      this.recordLine = this.line;
      let peek = this.pos;
      while (peek < length && (bytes[peek] === SPACE || bytes[peek] === TAB)) peek++;
      if (peek >= length) {
        this.pos = length;
        return 'blank';
      }
      const first = bytes[peek];
      if (first === LF || first === CR) {
        this.pos = peek;
        this.consumeLineEnd();
        return 'blank';
      }
      if (first === HASH) {
        this.pos = peek;
        while (this.pos < length && bytes[this.pos] !== LF && bytes[this.pos] !== CR) this.pos++;
        this.consumeLineEnd();
        this.sawComment = true;
        continue;
      }
      this.fieldCount = 0;
      if (this.delimiter < 0) this.scanSpaceSeparated();
      else this.scanDelimited();
      return 'record';
    }
  }

  /** The text of field k, decoded as UTF-8, with quotes undone. */
  fieldText(k: number): string {
    const text = this.bytes.toString('utf8', this.fieldStart[k], this.fieldEnd[k]);
    return this.fieldQuoting[k] === QUOTED_WITH_ESCAPES ? text.replace(/""/g, '"') : text;
  }

  private push(start: number, end: number, quoting: number): void {
    const k = this.fieldCount++;
    this.fieldStart[k] = start;
    this.fieldEnd[k] = end;
    this.fieldQuoting[k] = quoting;
  }

  private consumeLineEnd(): void {
    const bytes = this.bytes;
    if (this.pos < this.length) {
      if (bytes[this.pos] === CR) {
        this.pos++;
        if (this.pos < this.length && bytes[this.pos] === LF) this.pos++;
      } else if (bytes[this.pos] === LF) {
        this.pos++;
      }
    }
    this.line++;
  }

  private isPadding(byte: number): boolean {
    return byte === SPACE || (byte === TAB && this.delimiter !== TAB);
  }

  private scanDelimited(): void {
    const bytes = this.bytes;
    const length = this.length;
    const delimiter = this.delimiter;
    for (;;) {
      let pos = this.pos;
      let peek = pos;
      while (peek < length && this.isPadding(bytes[peek])) peek++;
      if (peek < length && bytes[peek] === QUOTE) {
        pos = this.scanQuoted(peek);
        while (pos < length && this.isPadding(bytes[pos])) pos++;
        this.pos = pos;
        if (pos >= length) return;
        const after = bytes[pos];
        if (after === delimiter) {
          this.pos = pos + 1;
          continue;
        }
        if (after === LF || after === CR) {
          this.consumeLineEnd();
          return;
        }
        throw this.textAfterQuote();
      }
      const start = pos;
      let byte = 0;
      while (pos < length) {
        byte = bytes[pos];
        if (byte === delimiter || byte === LF || byte === CR) break;
        pos++;
      }
      this.push(start, pos, UNQUOTED);
      this.pos = pos;
      if (pos >= length) return;
      if (byte === delimiter) {
        this.pos = pos + 1;
        continue;
      }
      this.consumeLineEnd();
      return;
    }
  }

  private scanSpaceSeparated(): void {
    const bytes = this.bytes;
    const length = this.length;
    let pos = this.pos;
    for (;;) {
      while (pos < length && (bytes[pos] === SPACE || bytes[pos] === TAB)) pos++;
      if (pos >= length) {
        this.pos = pos;
        return;
      }
      let byte = bytes[pos];
      if (byte === LF || byte === CR) {
        this.pos = pos;
        this.consumeLineEnd();
        return;
      }
      if (byte === QUOTE) {
        pos = this.scanQuoted(pos);
        if (pos < length) {
          byte = bytes[pos];
          if (byte !== SPACE && byte !== TAB && byte !== LF && byte !== CR) {
            this.pos = pos;
            throw this.textAfterQuote();
          }
        }
        continue;
      }
      const start = pos;
      while (pos < length) {
        byte = bytes[pos];
        if (byte === SPACE || byte === TAB || byte === LF || byte === CR) break;
        pos++;
      }
      this.push(start, pos, UNQUOTED);
    }
  }

  /** Reads a quoted field whose opening quote is at `open`; returns the position after the closing quote. */
  private scanQuoted(open: number): number {
    const bytes = this.bytes;
    const length = this.length;
    const openLine = this.line;
    let pos = open + 1;
    let escaped = false;
    for (;;) {
      if (pos >= length) {
        // eslint-disable-next-line @typescript-eslint/only-throw-error -- a sentinel caught at the feed, no stack needed
        if (!this.final) throw INCOMPLETE;
        throw new UsageError(
          `${this.source} line ${openLine}, column ${this.fieldCount + 1}: a quoted field is never closed; end it with " (write "" for a literal quote)`,
        );
      }
      const byte = bytes[pos];
      if (byte === QUOTE) {
        if (pos + 1 < length && bytes[pos + 1] === QUOTE) {
          escaped = true;
          pos += 2;
          continue;
        }
        break;
      }
      if (byte === LF || (byte === CR && !(pos + 1 < length && bytes[pos + 1] === LF))) this.line++;
      pos++;
    }
    this.push(open + 1, pos, escaped ? QUOTED_WITH_ESCAPES : QUOTED);
    return pos + 1;
  }

  private textAfterQuote(): UsageError {
    return new UsageError(
      `${this.source} line ${this.line}, column ${this.fieldCount}: text follows a closing quote; a quoted field must end at the delimiter (write "" for a literal quote)`,
    );
  }
}

/**
 * Guesses the delimiter of .txt/.dat text from its first lines: the first of tab, semicolon, comma that
 * appears (outside quotes) the same nonzero number of times on every sampled line; otherwise runs of spaces,
 * which also covers a single column.
 */
export const SNIFF_BYTES = 65536;

export function sniffDelimiter(bytes: Buffer, start: number): Delimiter {
  const windowEnd = Math.min(bytes.length, start + SNIFF_BYTES);
  const candidates: Delimiter[] = ['tab', 'semicolon', 'comma'];
  const counts: number[][] = candidates.map(() => []);
  let pos = start;
  let lines = 0;
  while (pos < windowEnd && lines < 50) {
    let end = pos;
    let inQuotes = false;
    const lineCounts = [0, 0, 0];
    while (end < windowEnd) {
      const byte = bytes[end];
      if (byte === QUOTE) inQuotes = !inQuotes;
      else if (!inQuotes && (byte === LF || byte === CR)) break;
      else if (!inQuotes) {
        for (let c = 0; c < candidates.length; c++) if (byte === delimiterBytes[candidates[c]]) lineCounts[c]++;
      }
      end++;
    }
    // A line cut off by the window would miscount; it is not sampled unless it ends the file.
    if (end >= windowEnd && windowEnd < bytes.length) break;
    let first = pos;
    while (first < end && (bytes[first] === SPACE || bytes[first] === TAB)) first++;
    if (first < end && bytes[first] !== HASH) {
      for (let c = 0; c < candidates.length; c++) counts[c].push(lineCounts[c]);
      lines++;
    }
    pos = end + 1;
  }
  for (let c = 0; c < candidates.length; c++) {
    const seen = counts[c];
    if (seen.length > 0 && seen[0] > 0 && seen.every((count) => count === seen[0])) return candidates[c];
  }
  return 'spaces';
}
